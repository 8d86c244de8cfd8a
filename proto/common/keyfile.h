/* keyfile.h: CURVE key pairs and their files, for the broker, the worker and
 * the client alike.
 *
 * File formats (ours). A public key file:
 *     # fitfarm public key for NAME (CURVE, Z85)
 *     <40 Z85 characters>
 * A secret key file (created mode 0600, refused if group or others can read it):
 *     # fitfarm SECRET key for NAME - keep private
 *     secret: <40 Z85 characters>
 *     public: <40 Z85 characters>
 * Lines starting with '#' are comments; blank lines are ignored; anything
 * else is an error naming the line. The "public:" line is optional and, when
 * present, must match the public key computed from the secret one. A secret
 * file where a public one is expected (and the other way round) is refused
 * with a sentence saying so. Z85 is ZeroMQ RFC 32.
 *
 * Secrets live in sodium_malloc memory (guard pages, no swap) and are wiped
 * when released. Nothing here aborts: the client library uses it too. Not
 * here: sockets (callers hand the 32-byte keys to ZeroMQ). */
#ifndef COMMON_KEYFILE_H
#define COMMON_KEYFILE_H

#include <stddef.h>
#include <stdint.h>

#define COMMON_KEY_BYTES 32
#define COMMON_KEY_Z85 40            /* characters of a Z85 key */
#define COMMON_KEY_FINGERPRINT 17    /* 16 hex digits and NUL */
#define COMMON_KEYFILE_MAX_BYTES 4096 /* a key file is tiny; more is not ours */

/* A key pair; allocated with sodium_malloc. */
typedef struct {
    uint8_t public_key[COMMON_KEY_BYTES];
    uint8_t secret_key[COMMON_KEY_BYTES];
} common_keypair_t;

/* Z85 (RFC 32) of exactly 32 bytes into 41 characters (NUL-terminated). */
void common_z85_encode_key(const uint8_t key[COMMON_KEY_BYTES], char out[COMMON_KEY_Z85 + 1]);
/* Decodes n Z85 characters (n a multiple of 5) into n*4/5 bytes. Returns 0,
 * or -1 on a character outside the alphabet or a group past 2^32-1. */
int common_z85_decode(const char *text, size_t n, uint8_t *out);

/* Key fingerprint for logs: the first 8 bytes of BLAKE2b-256 of the public
 * key, in lower-case hex. Never derived from a secret. */
void common_key_fingerprint(const uint8_t public_key[COMMON_KEY_BYTES],
                            char out[COMMON_KEY_FINGERPRINT]);

/* Parses the text of a public key file. Returns 0, or -1 with a sentence in err. */
int common_keyfile_parse_public(const char *text, size_t len, uint8_t public_key[COMMON_KEY_BYTES],
                                char *err, size_t errlen);
/* Parses the text of a secret key file into *pair (sodium_malloc memory).
 * Returns 0, or -1 with err. */
int common_keyfile_parse_secret(const char *text, size_t len, common_keypair_t *pair, char *err,
                                size_t errlen);

/* Reads a public key file. Returns 0, or -1 with err naming the file. */
int common_keyfile_read_public(const char *path, uint8_t public_key[COMMON_KEY_BYTES], char *err,
                               size_t errlen);
/* Reads a secret key file (refused if group or others may read it). On
 * success *out is a new pair the caller releases with common_keypair_destroy. */
int common_keyfile_read_secret(const char *path, common_keypair_t **out, char *err,
                               size_t errlen);
/* Makes a new pair (libsodium crypto_box_keypair: Curve25519, as CURVE uses).
 * Caller destroys *out. Returns 0 or -1 (out of secure memory). */
int common_keypair_new(common_keypair_t **out);
/* Wipes and frees; sets *pair_p NULL; accepts NULL. */
void common_keypair_destroy(common_keypair_t **pair_p);

/* Writes DIR/NAME.public (0644) and DIR/NAME.secret (0600), refusing to
 * overwrite either. NAME is 1..64 of [A-Za-z0-9._-] not starting with '.'.
 * On success the paths are written to public_path / secret_path (if not NULL).
 * Returns 0, or -1 with err. */
int common_keyfile_write_pair(const char *dir, const char *name, const common_keypair_t *pair,
                              char *public_path, size_t public_len, char *secret_path,
                              size_t secret_len, char *err, size_t errlen);

#endif
