/* test_proto_key.c: content keys, evaluation seeds and file digests
 * (proto/key.h), checked against RFC 7693's BLAKE2b test vector and against
 * an independent implementation of the key.h encodings in Python's hashlib
 * (hashlib.blake2b with key= and digest_size=32), run through $PYTHON. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>
#include <sodium.h>

#include "proto/key.h"
#include "proto/msg.h"

/* The Python side: the encodings exactly as key.h words them, written from
 * the header comment, not from key.c. Each argument is one case; one hex
 * digest per line comes back.
 *   seed:<run_seed>:<mode>:<genome hex>:<replicate>
 *   key:<plugin hex>:<version hex>:<params hex>:<genome hex>:<stochastic>:<seed>:<digest hex or ->  */
static const char s_python[] =
    "import sys, hashlib, struct\n"
    "def field(b): return struct.pack('<I', len(b)) + b\n"
    "for arg in sys.argv[1:]:\n"
    "    p = arg.split(':')\n"
    "    if p[0] == 'seed':\n"
    "        run_seed, mode, genome, rep = int(p[1]), int(p[2]), bytes.fromhex(p[3]), int(p[4])\n"
    "        key = struct.pack('<Q', run_seed) + b'ffseedv1'\n"
    "        if mode == 1: msg = b'\\x01' + struct.pack('<I', rep)\n"
    "        else: msg = b'\\x00' + hashlib.blake2b(genome, digest_size=32).digest() + struct.pack('<I', rep)\n"
    "        h = hashlib.blake2b(msg, key=key, digest_size=32).digest()\n"
    "        print('%016x' % struct.unpack('<Q', h[:8])[0])\n"
    "    else:\n"
    "        plugin, version, params, genome = (bytes.fromhex(x) for x in p[1:5])\n"
    "        m = b'fitfarm-key-v1' + field(plugin) + field(version) + field(params) + field(genome)\n"
    "        if int(p[5]): m += struct.pack('<Q', int(p[6]))\n"
    "        if p[7] != '-': m += bytes.fromhex(p[7])\n"
    "        print(hashlib.blake2b(m, digest_size=32).hexdigest())\n";

static const char *s_python_path(void)
{
    const char *py = getenv("PYTHON");
    return py && py[0] ? py : "/usr/bin/python3";
}

/* Runs the Python reference over the cases; returns its stdout lines in
 * lines[0..n) (caller frees each). Fails the test if Python fails. */
static void s_run_python(char **cases, size_t n, char **lines)
{
    char script_path[] = "/tmp/fitfarm-keyref-XXXXXX";
    int fd = mkstemp(script_path);
    assert_true(fd >= 0);
    assert_int_equal(write(fd, s_python, sizeof s_python - 1), (ssize_t)(sizeof s_python - 1));
    close(fd);

    size_t cap = 256;
    for (size_t i = 0; i < n; i++)
        cap += strlen(cases[i]) + 3;
    char *cmd = malloc(cap);
    assert_non_null(cmd);
    size_t off = (size_t)snprintf(cmd, cap, "'%s' %s", s_python_path(), script_path);
    for (size_t i = 0; i < n; i++)
        off += (size_t)snprintf(cmd + off, cap - off, " '%s'", cases[i]);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    char buf[256];
    size_t got = 0;
    while (fgets(buf, sizeof buf, p) && got < n) {
        buf[strcspn(buf, "\n")] = '\0';
        lines[got++] = strdup(buf);
    }
    int status = pclose(p);
    unlink(script_path);
    free(cmd);
    if (status != 0 || got != n)
        fail_msg("python reference failed (status %d, %zu of %zu lines)", status, got, n);
}

static char *s_hexdup(const void *p, size_t n)
{
    char *out = malloc(2 * n + 1);
    assert_non_null(out);
    proto_hex(p, n, out);
    return out;
}

/* ---- usage example ------------------------------------------------------ */

/* How the broker computes a genome's seed and its content key. */
static void test_usage_example(void **state)
{
    (void)state;
    const double genome[3] = {0.1, 0.2, 0.3}; /* f64 genome, little-endian bytes on x86-64 */
    uint64_t seed = proto_seed_derive(12345, PROTO_SEED_GENOME, (const uint8_t *)genome,
                                      sizeof genome, /*replicate*/ 0);
    proto_key_input_t in = {.plugin = "zdt1", .version = "1.0", .params = "{\"n\":30}",
                            .genome = (const uint8_t *)genome, .genome_len = sizeof genome,
                            .stochastic = 1, .seed = seed, .digest = NULL};
    uint8_t key[PROTO_KEY_BYTES];
    assert_int_equal(proto_key_compute(&in, key), 0);
    char hex[2 * PROTO_KEY_BYTES + 1];
    proto_hex(key, sizeof key, hex);
    assert_int_equal(strlen(hex), 64);
    /* the same inputs always give the same key and seed */
    uint8_t again[PROTO_KEY_BYTES];
    assert_int_equal(proto_key_compute(&in, again), 0);
    assert_memory_equal(key, again, sizeof key);
    assert_int_equal(seed, proto_seed_derive(12345, PROTO_SEED_GENOME, (const uint8_t *)genome,
                                             sizeof genome, 0));
}

/* ---- outside references ------------------------------------------------- */

/* RFC 7693, Appendix A: BLAKE2b-512("abc"). Checks the primitive under all
 * our keys (libsodium's crypto_generichash is BLAKE2b). */
static void test_blake2b_rfc7693_vector(void **state)
{
    (void)state;
    static const char want[] = "ba80a53f981c4d0d6a2797b69f12f6e94c212f14685ac4b74b12bb6fdbffa2d1"
                               "7d87c5392aab792dc252d5de4533cc9518d38aa8dbf1925ab92386edd4009923";
    uint8_t out[64];
    assert_int_equal(crypto_generichash(out, sizeof out, (const uint8_t *)"abc", 3, NULL, 0), 0);
    char hex[129];
    proto_hex(out, sizeof out, hex);
    assert_string_equal(hex, want);
}

static void test_hex(void **state)
{
    (void)state;
    const uint8_t b[] = {0x00, 0x0f, 0xa5, 0xff};
    char hex[9];
    proto_hex(b, sizeof b, hex);
    assert_string_equal(hex, "000fa5ff");
    proto_hex(b, 0, hex);
    assert_string_equal(hex, "");
}

/* Seeds against hashlib.blake2b implementing key.h's words independently. */
static void test_seeds_match_python(void **state)
{
    (void)state;
    uint8_t big[1000];
    for (size_t i = 0; i < sizeof big; i++)
        big[i] = (uint8_t)(i * 31 + 7);
    struct {
        uint64_t run_seed;
        int mode;
        const uint8_t *genome;
        size_t len;
        uint32_t rep;
    } cs[] = {
        {0, PROTO_SEED_GENOME, NULL, 0, 0},
        {1, PROTO_SEED_GENOME, (const uint8_t *)"abc", 3, 0},
        {1, PROTO_SEED_GENOME, (const uint8_t *)"abc", 3, 1},
        {UINT64_MAX, PROTO_SEED_GENOME, big, sizeof big, UINT32_MAX},
        {42, PROTO_SEED_COMMON, (const uint8_t *)"abc", 3, 0},
        {42, PROTO_SEED_COMMON, NULL, 0, 9999},
        {0x0123456789abcdefull, PROTO_SEED_COMMON, big, sizeof big, 7},
    };
    enum { N = sizeof cs / sizeof cs[0] };
    char *cases[N], *lines[N];
    for (size_t i = 0; i < N; i++) {
        char *gh = s_hexdup(cs[i].genome ? cs[i].genome : (const uint8_t *)"", cs[i].len);
        size_t cap = strlen(gh) + 96;
        cases[i] = malloc(cap);
        snprintf(cases[i], cap, "seed:%llu:%d:%s:%lu", (unsigned long long)cs[i].run_seed,
                 cs[i].mode, gh, (unsigned long)cs[i].rep);
        free(gh);
    }
    s_run_python(cases, N, lines);
    for (size_t i = 0; i < N; i++) {
        char mine[17];
        uint64_t seed = proto_seed_derive(cs[i].run_seed, cs[i].mode, cs[i].genome, cs[i].len,
                                          cs[i].rep);
        snprintf(mine, sizeof mine, "%016llx", (unsigned long long)seed);
        if (strcmp(mine, lines[i]) != 0)
            fail_msg("seed case %zu: ours %s, hashlib %s", i, mine, lines[i]);
        free(cases[i]);
        free(lines[i]);
    }
}

/* Content keys against hashlib.blake2b over key.h's length-prefixed layout. */
static void test_keys_match_python(void **state)
{
    (void)state;
    uint8_t digest[PROTO_DIGEST_BYTES];
    for (size_t i = 0; i < sizeof digest; i++)
        digest[i] = (uint8_t)(0xf0 ^ i);
    const double g[2] = {1.0, -0.0};
    proto_key_input_t cs[] = {
        {.plugin = "", .version = "", .params = "", .genome = NULL, .genome_len = 0},
        {.plugin = "zdt1", .version = "1.0", .params = "{\"n\":30}", .genome = (const uint8_t *)g,
         .genome_len = sizeof g},
        {.plugin = "zdt1", .version = "1.0", .params = "{\"n\":30}", .genome = (const uint8_t *)g,
         .genome_len = sizeof g, .stochastic = 1, .seed = UINT64_MAX},
        {.plugin = "zdt1", .version = "1.0", .params = "{\"n\":30}", .genome = (const uint8_t *)g,
         .genome_len = sizeof g, .digest = digest},
        {.plugin = "granular", .version = "2.3", .params = "{}", .genome = (const uint8_t *)"x",
         .genome_len = 1, .stochastic = 1, .seed = 5, .digest = digest},
    };
    enum { N = sizeof cs / sizeof cs[0] };
    char *cases[N], *lines[N];
    for (size_t i = 0; i < N; i++) {
        char *ph = s_hexdup(cs[i].plugin, strlen(cs[i].plugin));
        char *vh = s_hexdup(cs[i].version, strlen(cs[i].version));
        char *mh = s_hexdup(cs[i].params, strlen(cs[i].params));
        char *gh = s_hexdup(cs[i].genome ? cs[i].genome : (const uint8_t *)"", cs[i].genome_len);
        char *dh = cs[i].digest ? s_hexdup(cs[i].digest, PROTO_DIGEST_BYTES) : strdup("-");
        size_t cap = strlen(ph) + strlen(vh) + strlen(mh) + strlen(gh) + strlen(dh) + 64;
        cases[i] = malloc(cap);
        snprintf(cases[i], cap, "key:%s:%s:%s:%s:%d:%llu:%s", ph, vh, mh, gh, cs[i].stochastic,
                 (unsigned long long)cs[i].seed, dh);
        free(ph), free(vh), free(mh), free(gh), free(dh);
    }
    s_run_python(cases, N, lines);
    for (size_t i = 0; i < N; i++) {
        uint8_t key[PROTO_KEY_BYTES];
        char mine[2 * PROTO_KEY_BYTES + 1];
        assert_int_equal(proto_key_compute(&cs[i], key), 0);
        proto_hex(key, sizeof key, mine);
        if (strcmp(mine, lines[i]) != 0)
            fail_msg("key case %zu: ours %s, hashlib %s", i, mine, lines[i]);
        free(cases[i]);
        free(lines[i]);
    }
}

/* ---- properties users rely on ------------------------------------------- */

static void test_seed_modes(void **state)
{
    (void)state;
    const uint8_t a[] = {1, 2, 3}, b[] = {1, 2, 4};
    /* genome mode: the seed follows the genome */
    assert_int_not_equal(proto_seed_derive(7, PROTO_SEED_GENOME, a, 3, 0),
                         proto_seed_derive(7, PROTO_SEED_GENOME, b, 3, 0));
    /* common random numbers: every genome of a replicate sees the same noise ... */
    assert_int_equal(proto_seed_derive(7, PROTO_SEED_COMMON, a, 3, 0),
                     proto_seed_derive(7, PROTO_SEED_COMMON, b, 3, 0));
    assert_int_equal(proto_seed_derive(7, PROTO_SEED_COMMON, a, 3, 4),
                     proto_seed_derive(7, PROTO_SEED_COMMON, NULL, 0, 4));
    /* ... and replicates differ from each other */
    assert_int_not_equal(proto_seed_derive(7, PROTO_SEED_COMMON, a, 3, 0),
                         proto_seed_derive(7, PROTO_SEED_COMMON, a, 3, 1));
    assert_int_not_equal(proto_seed_derive(7, PROTO_SEED_GENOME, a, 3, 0),
                         proto_seed_derive(7, PROTO_SEED_GENOME, a, 3, 1));
    /* and the run seed matters in both modes */
    assert_int_not_equal(proto_seed_derive(7, PROTO_SEED_GENOME, a, 3, 0),
                         proto_seed_derive(8, PROTO_SEED_GENOME, a, 3, 0));
    assert_int_not_equal(proto_seed_derive(7, PROTO_SEED_COMMON, a, 3, 0),
                         proto_seed_derive(8, PROTO_SEED_COMMON, a, 3, 0));
    /* 1000 replicates of one genome: no two seeds collide */
    uint64_t seen[1000];
    for (uint32_t r = 0; r < 1000; r++) {
        seen[r] = proto_seed_derive(7, PROTO_SEED_GENOME, a, 3, r);
        for (uint32_t q = 0; q < r; q++)
            assert_int_not_equal(seen[q], seen[r]);
    }
}

static void test_key_properties(void **state)
{
    (void)state;
    uint8_t k1[PROTO_KEY_BYTES], k2[PROTO_KEY_BYTES];
    proto_key_input_t in = {.plugin = "p", .version = "1", .params = "{}",
                            .genome = (const uint8_t *)"gg", .genome_len = 2};
    assert_int_equal(proto_key_compute(&in, k1), 0);
    /* deterministic plugins: the seed is not part of the key */
    in.seed = 99;
    assert_int_equal(proto_key_compute(&in, k2), 0);
    assert_memory_equal(k1, k2, sizeof k1);
    /* stochastic: it is */
    in.stochastic = 1;
    assert_int_equal(proto_key_compute(&in, k2), 0);
    assert_memory_not_equal(k1, k2, sizeof k1);
    /* length prefixes: moving a byte between fields changes the key */
    proto_key_input_t x = {.plugin = "ab", .version = "c", .params = "{}"};
    proto_key_input_t y = {.plugin = "a", .version = "bc", .params = "{}"};
    assert_int_equal(proto_key_compute(&x, k1), 0);
    assert_int_equal(proto_key_compute(&y, k2), 0);
    assert_memory_not_equal(k1, k2, sizeof k1);
    /* NULL strings count as empty */
    proto_key_input_t n1 = {0}, n2 = {.plugin = "", .version = "", .params = ""};
    assert_int_equal(proto_key_compute(&n1, k1), 0);
    assert_int_equal(proto_key_compute(&n2, k2), 0);
    assert_memory_equal(k1, k2, sizeof k1);
}

/* proto_digest_file streams the file; the digest equals one-shot BLAKE2b-256
 * of the bytes (hashlib.blake2b(data, digest_size=32) in Python computes the
 * same; libsodium's one-shot call is the reference here, checked against
 * RFC 7693 above). 200001 bytes crosses several 64 KiB read chunks. */
static void test_digest_file(void **state)
{
    (void)state;
    char path[] = "/tmp/fitfarm-digest-XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    size_t n = 200001;
    uint8_t *data = malloc(n);
    for (size_t i = 0; i < n; i++)
        data[i] = (uint8_t)(i * 2654435761u >> 13);
    assert_int_equal(write(fd, data, n), (ssize_t)n);
    close(fd);

    uint8_t got[PROTO_DIGEST_BYTES], want[PROTO_DIGEST_BYTES];
    assert_int_equal(proto_digest_file(path, got), 0);
    crypto_generichash(want, sizeof want, data, n, NULL, 0);
    assert_memory_equal(got, want, sizeof got);

    /* and against Python's hashlib, an independent BLAKE2b */
    char cmd[512], line[128];
    snprintf(cmd, sizeof cmd,
             "'%s' -c 'import hashlib,sys; print(hashlib.blake2b(open(sys.argv[1],\"rb\").read(), digest_size=32).hexdigest())' %s",
             s_python_path(), path);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    assert_non_null(fgets(line, sizeof line, p));
    assert_int_equal(pclose(p), 0);
    line[strcspn(line, "\n")] = '\0';
    char hex[2 * PROTO_DIGEST_BYTES + 1];
    proto_hex(got, sizeof got, hex);
    assert_string_equal(hex, line);

    unlink(path);
    free(data);
    assert_int_equal(proto_digest_file("/nonexistent/fitfarm/plugin.so", got), -1);
    assert_int_equal(proto_digest_file(NULL, got), -1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_blake2b_rfc7693_vector),
        cmocka_unit_test(test_hex),
        cmocka_unit_test(test_seeds_match_python),
        cmocka_unit_test(test_keys_match_python),
        cmocka_unit_test(test_seed_modes),
        cmocka_unit_test(test_key_properties),
        cmocka_unit_test(test_digest_file),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
