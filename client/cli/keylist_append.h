/* keylist_append.h: adding one "KEY TEXT" line to a key list the broker
 * reads (clients.allow, workers.allow, runs.share), for `fitfarm allow` and
 * `fitfarm share`. Not here: parsing the lists (common/allowlist.h,
 * common/sharelist.h), which the commands do first to refuse duplicates. */
#ifndef CLIENT_CLI_KEYLIST_APPEND_H
#define CLIENT_CLI_KEYLIST_APPEND_H

#include <stdint.h>

/* Appends "Z85KEY TEXT\n" to path with O_APPEND (one write, so a broker
 * reading at the same time sees the whole line or none), creating the file
 * (mode 0644: it holds public keys) with header as its first line when it
 * does not exist, and first ending a last line that lacks its newline.
 * Returns 0, or 1 after printing why with prog's name. */
int cli_keylist_append(const char *prog, const char *path, const char *header,
                       const uint8_t key[32], const char *text);

#endif
