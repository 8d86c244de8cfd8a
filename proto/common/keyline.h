/* keyline.h: the "KEY TEXT" line both key lists are made of (allowlist.h:
 * "KEY [label]", sharelist.h: "KEY RUN"): a 40-character Z85 public key, a
 * blank, and a bounded text. One parser, so the two lists refuse the same
 * mistakes with the same words. */
#ifndef COMMON_KEYLINE_H
#define COMMON_KEYLINE_H

#include <stddef.h>
#include <stdint.h>

#include "keyfile.h"

/* A byte allowed in the text: printable ASCII and UTF-8 bytes, no control
 * characters (the caller decides about tab). */
int common_keyline_char_ok(unsigned char c);

/* Decodes the key of line[0..n) (the caller checked n >= COMMON_KEY_Z85 and
 * the separator) into key, skips the blanks after it, and copies the text
 * into text (max + 1 bytes), NUL-terminated. The text must be min..max
 * bytes with no control character but tab; what names it in the messages
 * ("label", "run id"). Returns 0, or -1 with "line N: ..." in err. */
int common_keyline_split(const char *line, size_t n, long number, const char *what, size_t min,
                         size_t max, uint8_t key[COMMON_KEY_BYTES], char *text, char *err,
                         size_t errlen);

/* Room for entry n in an array of elem-byte entries holding *cap: returns
 * entries, or a copy twice as large (16 at first, *cap updated), or NULL
 * when out of memory (entries untouched). */
void *common_keyline_grow(void *entries, size_t *cap, size_t n, size_t elem);

/* A list's whole text, before its lines are read: at most max bytes and no
 * NUL. what names the list in the messages ("an allow-list"). Returns 0, or
 * -1 with the reason in err. */
int common_keyline_text_ok(const char *text, size_t len, size_t max, const char *what, char *err,
                           size_t errlen);

#endif
