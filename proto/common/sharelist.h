/* sharelist.h: the broker's list of runs shared with other client keys,
 * runs.share in its --keys folder. A run belongs to the client key that
 * created it; a line of this list lets one more key use it (submit to it,
 * receive and acknowledge its results) without becoming its owner. Shared by
 * the broker (reads it at start and on SIGHUP) and `fitfarm share` (appends).
 *
 * Format (ours), UTF-8 text:
 *     # comment lines start with '#'; blank lines are ignored
 *     <40 Z85 characters of a client public key> <run id>
 * The run id is the rest of the line after the spaces or tabs that follow
 * the key (leading and trailing spaces and tabs are not part of it), 1 to
 * COMMON_SHARE_RUN_MAX bytes, no control characters. A (key, run) pair may
 * appear once. A list that does not parse is not loaded at all (the broker
 * keeps the previous one) and the error names the line. Nothing here aborts
 * or logs. */
#ifndef COMMON_SHARELIST_H
#define COMMON_SHARELIST_H

#include <stddef.h>
#include <stdint.h>

#include "keyfile.h"

#define COMMON_SHARE_RUN_MAX 128 /* the protocol's run id cap (PROTO_MAX_NAME_BYTES) */
#define COMMON_SHARE_MAX_ENTRIES 100000
#define COMMON_SHARE_MAX_BYTES (16u * 1024u * 1024u)

typedef struct common_sharelist common_sharelist_t;

/* Parses list text. On success *out is a new list the caller destroys.
 * Returns 0, or -1 with a sentence naming the line in err. */
int common_sharelist_parse(const char *text, size_t len, common_sharelist_t **out, char *err,
                           size_t errlen);
/* Reads and parses a file; a missing file is an empty list. */
int common_sharelist_read(const char *path, common_sharelist_t **out, char *err, size_t errlen);
void common_sharelist_destroy(common_sharelist_t **self_p);

size_t common_sharelist_size(const common_sharelist_t *self);
/* 1 if key may use run_id by this list, else 0 (O(log n)); NULL self: 0. */
int common_sharelist_has(const common_sharelist_t *self, const char *run_id,
                         const uint8_t key[COMMON_KEY_BYTES]);
/* 0 if run_id can be written on a line of the list, else -1. */
int common_sharelist_run_ok(const char *run_id);

#endif
