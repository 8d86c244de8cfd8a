/* key.c: content keys, evaluation seeds and file digests, all BLAKE2b through
 * libsodium's crypto_generichash. The exact byte layouts are in key.h and
 * spelled out again beside each function, because every part and every
 * replayed run must reproduce them bit for bit. Not here: deciding whether a
 * plugin is stochastic or whether builds are kept apart (the broker's call). */
#include <stdatomic.h>
#include <stdio.h>
#include <string.h>

#include <sodium.h>

#include "key.h"
#include "msg.h"

#define S_KEY_DOMAIN "fitfarm-key-v1"
#define S_SEED_SALT "ffseedv1"

/* sodium_init() is itself thread-safe and idempotent; the flag only saves the
 * call on the hot path. crypto_generichash works even if initialisation
 * failed (it falls back to the portable BLAKE2b), so only the key API, which
 * can return an error, reports it. */
static atomic_int s_ready;

static int s_init(void)
{
    if (atomic_load(&s_ready))
        return 0;
    if (sodium_init() < 0)
        return -1;
    atomic_store(&s_ready, 1);
    return 0;
}

static void s_put_u32le(uint8_t *p, uint32_t v)
{
    for (int i = 0; i < 4; i++)
        p[i] = (uint8_t)(v >> (8 * i));
}

static void s_put_u64le(uint8_t *p, uint64_t v)
{
    for (int i = 0; i < 8; i++)
        p[i] = (uint8_t)(v >> (8 * i));
}

/* Feeds u32 LE length then the bytes. Lengths past 4 GiB cannot occur: every
 * field is bounded by limits.h far below that. */
static void s_update_field(crypto_generichash_state *st, const void *p, size_t n)
{
    uint8_t len[4];
    s_put_u32le(len, (uint32_t)n);
    crypto_generichash_update(st, len, sizeof len);
    if (n)
        crypto_generichash_update(st, p, n);
}

/* Key layout (NULL strings count as ""):
 *   "fitfarm-key-v1"              14 bytes, no length, no NUL
 *   u32 LE len || plugin
 *   u32 LE len || version
 *   u32 LE len || params
 *   u32 LE len || genome
 *   seed u64 LE                   only when stochastic
 *   digest (32 bytes)             only when digest != NULL
 * The optional tail is 0, 8, 32 or 40 bytes after self-delimiting fields, so
 * no two different inputs share an encoding. */
int proto_key_compute(const proto_key_input_t *in, uint8_t out[PROTO_KEY_BYTES])
{
    crypto_generichash_state st;
    int rc = s_init();
    if (rc < 0)
        goto cleanup;
    const char *plugin = in->plugin ? in->plugin : "";
    const char *version = in->version ? in->version : "";
    const char *params = in->params ? in->params : "";

    crypto_generichash_init(&st, NULL, 0, PROTO_KEY_BYTES);
    crypto_generichash_update(&st, (const uint8_t *)S_KEY_DOMAIN, strlen(S_KEY_DOMAIN));
    s_update_field(&st, plugin, strlen(plugin));
    s_update_field(&st, version, strlen(version));
    s_update_field(&st, params, strlen(params));
    s_update_field(&st, in->genome, in->genome ? in->genome_len : 0);
    if (in->stochastic) {
        uint8_t seed[8];
        s_put_u64le(seed, in->seed);
        crypto_generichash_update(&st, seed, sizeof seed);
    }
    if (in->digest)
        crypto_generichash_update(&st, in->digest, PROTO_DIGEST_BYTES);
    crypto_generichash_final(&st, out, PROTO_KEY_BYTES);
cleanup:
    return rc;
}

/* Seed: first 8 bytes, little-endian, of keyed BLAKE2b-256 with the 16-byte
 * key run_seed u64 LE || "ffseedv1", over
 *   genome mode: 0x00 || BLAKE2b-256(genome) || replicate u32 LE   (37 bytes)
 *   common mode: 0x01 || replicate u32 LE                          (5 bytes)
 * Any seed_mode other than PROTO_SEED_COMMON is genome mode. */
uint64_t proto_seed_derive(uint64_t run_seed, int seed_mode, const uint8_t *genome,
                           size_t genome_len, uint32_t replicate)
{
    uint8_t key[16];
    uint8_t msg[1 + 32 + 4];
    uint8_t hash[32];
    size_t n = 0;

    (void)s_init();
    s_put_u64le(key, run_seed);
    memcpy(key + 8, S_SEED_SALT, 8);
    if (seed_mode == PROTO_SEED_COMMON) {
        msg[n++] = 0x01;
    } else {
        msg[n++] = 0x00;
        crypto_generichash(msg + n, 32, genome, genome ? genome_len : 0, NULL, 0);
        n += 32;
    }
    s_put_u32le(msg + n, replicate);
    n += 4;
    crypto_generichash(hash, sizeof hash, msg, n, key, sizeof key);
    uint64_t seed = 0;
    for (int i = 7; i >= 0; i--)
        seed = (seed << 8) | hash[i];
    return seed;
}

void proto_hex(const uint8_t *bytes, size_t n, char *out)
{
    static const char s_digits[] = "0123456789abcdef";
    for (size_t i = 0; i < n; i++) {
        out[2 * i] = s_digits[bytes[i] >> 4];
        out[2 * i + 1] = s_digits[bytes[i] & 0x0f];
    }
    out[2 * n] = '\0';
}

int proto_digest_file(const char *path, uint8_t out[PROTO_DIGEST_BYTES])
{
    int rc = -1;
    crypto_generichash_state st;
    uint8_t chunk[65536];
    FILE *f = NULL;

    if (!path || s_init() < 0)
        goto cleanup;
    f = fopen(path, "rb");
    if (!f)
        goto cleanup;
    crypto_generichash_init(&st, NULL, 0, PROTO_DIGEST_BYTES);
    size_t got;
    while ((got = fread(chunk, 1, sizeof chunk, f)) > 0)
        crypto_generichash_update(&st, chunk, got);
    if (ferror(f))
        goto cleanup;
    crypto_generichash_final(&st, out, PROTO_DIGEST_BYTES);
    rc = 0;
cleanup:
    if (f)
        fclose(f);
    return rc;
}
