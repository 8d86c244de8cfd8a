/* key.h: content keys and evaluation seeds (DESIGN.md "Keys, seeds, determinism").
 *
 * Content key = BLAKE2b-256 (libsodium crypto_generichash) over a canonical,
 * length-prefixed encoding of: a domain tag "fitfarm-key-v1", plugin name,
 * plugin version, canonical params, genome bytes, then the evaluation seed
 * (u64 little-endian) only when the plugin is stochastic, then the plugin's
 * build digest only when the broker asks to keep builds apart. Each variable
 * field is preceded by its length as u32 little-endian, so no two different
 * inputs share an encoding.
 *
 * Evaluation seed = first 8 bytes (little-endian) of keyed BLAKE2b-256 with the
 * 16-byte key (run_seed u64 LE || "ffseedv1") over:
 *   genome mode: 0x00 || BLAKE2b-256(genome) || replicate u32 LE
 *   common mode: 0x01 || replicate u32 LE
 * The seed depends on content only, never on worker, order or attempt. */
#ifndef PROTO_KEY_H
#define PROTO_KEY_H

#include <stddef.h>
#include <stdint.h>

#include "limits.h"

typedef struct {
    const char *plugin;
    const char *version;
    const char *params; /* canonical JSON */
    const uint8_t *genome;
    size_t genome_len;
    int stochastic;        /* nonzero: the seed is part of the key */
    uint64_t seed;         /* used only when stochastic */
    const uint8_t *digest; /* NULL, or PROTO_DIGEST_BYTES to keep builds apart */
} proto_key_input_t;

/* Computes the content key into out. Returns 0, or -1 if libsodium failed to
 * initialise. Thread-safe. */
int proto_key_compute(const proto_key_input_t *in, uint8_t out[PROTO_KEY_BYTES]);

/* Derives the evaluation seed. seed_mode is proto_seed_mode_t. */
uint64_t proto_seed_derive(uint64_t run_seed, int seed_mode, const uint8_t *genome,
                           size_t genome_len, uint32_t replicate);

/* Lower-case hex of n bytes into out (2n+1 bytes incl. NUL). */
void proto_hex(const uint8_t *bytes, size_t n, char *out);

/* BLAKE2b-256 digest of a file's contents (plugin build digest). Returns 0 or
 * -1 if the file cannot be read. Lives here so every part hashes the same way;
 * it reads a file, the one exception to this module's purity. */
int proto_digest_file(const char *path, uint8_t out[PROTO_DIGEST_BYTES]);

#endif
