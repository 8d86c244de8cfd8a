/* allowlist.h: the broker's lists of admitted public keys, clients.allow and
 * workers.allow in its --keys folder. Shared by the broker (which reads them,
 * and reloads them on SIGHUP) and the `fitfarm allow` command (which appends).
 *
 * Format (ours), UTF-8 text:
 *     # comment lines start with '#'; blank lines are ignored
 *     <40 Z85 characters of a public key> [label text]
 * The label is optional free text (printable, up to 128 bytes) after spaces
 * or tabs, e.g. "lab-pc-12 (Ana)". A key may appear once per list. Anything
 * else is an error naming the line: a list that does not parse is not loaded
 * at all (the broker keeps the previous one). Nothing here aborts or logs. */
#ifndef COMMON_ALLOWLIST_H
#define COMMON_ALLOWLIST_H

#include <stddef.h>
#include <stdint.h>

#include "keyfile.h"

#define COMMON_ALLOW_LABEL_MAX 128
#define COMMON_ALLOW_MAX_KEYS 100000
#define COMMON_ALLOW_MAX_BYTES (16u * 1024u * 1024u)

typedef struct {
    uint8_t key[COMMON_KEY_BYTES];
    char label[COMMON_ALLOW_LABEL_MAX + 1];
} common_allow_entry_t;

typedef struct common_allowlist common_allowlist_t;

/* Parses list text. On success *out is a new list the caller destroys.
 * Returns 0, or -1 with a sentence naming the line in err. */
int common_allowlist_parse(const char *text, size_t len, common_allowlist_t **out, char *err,
                           size_t errlen);
/* Reads and parses a file; a missing file is an empty list when missing_ok. */
int common_allowlist_read(const char *path, int missing_ok, common_allowlist_t **out, char *err,
                          size_t errlen);
void common_allowlist_destroy(common_allowlist_t **self_p);

size_t common_allowlist_size(const common_allowlist_t *self);
/* Entry i (0..size-1) in key order, or NULL past the end. Borrowed, valid
 * until destroy. */
const common_allow_entry_t *common_allowlist_at(const common_allowlist_t *self, size_t i);
/* The entry for key, or NULL (O(log n)). Borrowed, valid until destroy. */
const common_allow_entry_t *common_allowlist_find(const common_allowlist_t *self,
                                                  const uint8_t key[COMMON_KEY_BYTES]);

/* Checks a label for `fitfarm allow` (same rules as the parser). Returns 0 or -1. */
int common_allowlist_label_ok(const char *label);

#endif
