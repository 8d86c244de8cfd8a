/* keyline.c: the "KEY TEXT" line of the key lists (see keyline.h). Owns
 * nothing. */
#include "keyline.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int common_keyline_char_ok(unsigned char c)
{
    return c >= 0x20 && c != 0x7f; /* printable ASCII and UTF-8 bytes; no controls */
}

int common_keyline_split(const char *line, size_t n, long number, const char *what, size_t min,
                         size_t max, uint8_t key[COMMON_KEY_BYTES], char *text, char *err,
                         size_t errlen)
{
    if (common_z85_decode(line, COMMON_KEY_Z85, key) != 0) {
        snprintf(err, errlen, "line %ld: the key is not valid Z85", number);
        return -1;
    }
    const char *t = line + COMMON_KEY_Z85;
    size_t tn = n - COMMON_KEY_Z85;
    while (tn > 0 && (*t == ' ' || *t == '\t')) {
        t++;
        tn--;
    }
    if (tn < min || tn > max) {
        if (min == 0)
            snprintf(err, errlen, "line %ld: the %s is longer than %zu bytes", number, what, max);
        else
            snprintf(err, errlen, "line %ld: the %s must be %zu to %zu bytes", number, what, min,
                     max);
        return -1;
    }
    for (size_t k = 0; k < tn; k++) {
        if (!common_keyline_char_ok((unsigned char)t[k]) && t[k] != '\t') {
            snprintf(err, errlen, "line %ld: the %s has a control character", number, what);
            return -1;
        }
    }
    memcpy(text, t, tn);
    text[tn] = '\0';
    return 0;
}

void *common_keyline_grow(void *entries, size_t *cap, size_t n, size_t elem)
{
    if (n < *cap)
        return entries;
    size_t ncap = *cap ? *cap * 2 : 16;
    void *grown = realloc(entries, ncap * elem);
    if (grown)
        *cap = ncap;
    return grown;
}

int common_keyline_text_ok(const char *text, size_t len, size_t max, const char *what, char *err,
                           size_t errlen)
{
    if (len > max) {
        snprintf(err, errlen, "%zu bytes: larger than %s may be (%zu)", len, what, max);
        return -1;
    }
    if (memchr(text, '\0', len)) {
        snprintf(err, errlen, "contains a NUL byte: not %s", what);
        return -1;
    }
    return 0;
}
