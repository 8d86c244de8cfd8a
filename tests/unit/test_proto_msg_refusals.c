/* test_proto_msg_refusals.c: the wire messages (proto/msg.h), what must be
 * refused. The decoder must refuse every truncation, every oversize, every
 * mistyped field, trailing bytes, wrong versions and unknown types, cleanly
 * (nothing returned, nothing leaked) and naming the field; the encoder must
 * refuse what it could not decode. Byte strings are written by hand from the
 * MessagePack specification (msgpack.org, spec.md). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "proto/msg.h"
#include "tests/unit/support/proto_msg_fixture.h"

/* ---- refusals ----------------------------------------------------------- */

/* Every proper prefix of every valid encoding is refused, with no leak (the
 * sanitizer build checks) and no read past the prefix (ASan: each prefix is
 * copied into a buffer of exactly its length). */
static void test_every_truncation_fails(void **state)
{
    (void)state;
    for (size_t t = 0; t < fx_n_types; t++) {
        proto_msg_t m = fx_sample(fx_all_types[t]);
        size_t len;
        uint8_t *full = fx_encode(&m, &len);
        for (size_t cut = 0; cut < len; cut++) {
            uint8_t *part = malloc(cut ? cut : 1);
            assert_non_null(part);
            memcpy(part, full, cut);
            proto_msg_t *d = NULL;
            proto_err_t err;
            int rc = proto_msg_decode(part, cut, NULL, &d, &err);
            if (rc == PROTO_OK)
                fail_msg("%s cut at %zu of %zu decoded", proto_type_name((int)m.type), cut, len);
            assert_null(d);
            assert_int_equal(err.code, rc);
            assert_true(err.text[0] != '\0');
            free(part);
        }
        free(full);
    }
}

static void test_limits_lowered(void **state)
{
    (void)state;
    size_t len;
    proto_limits_t lim;

    proto_msg_t m = fx_sample(PROTO_SUBMIT);
    uint8_t *buf = fx_encode(&m, &len);
    lim = proto_limits_default();
    lim.genome_bytes = 4; /* item 1 has 5 bytes */
    fx_expect_refused(buf, len, &lim, PROTO_ELIMIT, "SUBMIT.items[1].genome: 5 bytes, limit 4");
    lim = proto_limits_default();
    lim.batch_items = 2;
    fx_expect_refused(buf, len, &lim, PROTO_ELIMIT, "SUBMIT.items: 3 elements, limit 2");
    lim = proto_limits_default();
    lim.name_bytes = 4;
    fx_expect_refused(buf, len, &lim, PROTO_ELIMIT, "SUBMIT.run_id: 5 bytes, limit 4");
    lim = proto_limits_default();
    lim.params_bytes = 7;
    fx_expect_refused(buf, len, &lim, PROTO_ELIMIT, "SUBMIT.params: 8 bytes, limit 7");
    lim = proto_limits_default();
    lim.message_bytes = (uint32_t)len - 1;
    fx_expect_refused(buf, len, &lim, PROTO_ELIMIT, "bytes, limit");
    lim.message_bytes = (uint32_t)len; /* exactly at the limit is fine */
    proto_msg_t *d = NULL;
    assert_int_equal(proto_msg_decode(buf, len, &lim, &d, NULL), PROTO_OK);
    proto_msg_destroy(&d);
    free(buf);

    m = fx_sample(PROTO_DONE);
    buf = fx_encode(&m, &len);
    lim = proto_limits_default();
    lim.objectives = 4;
    fx_expect_refused(buf, len, &lim, PROTO_ELIMIT, "DONE.outcomes[0].fitness: 5 elements, limit 4");
    lim = proto_limits_default();
    lim.error_bytes = 8;
    fx_expect_refused(buf, len, &lim, PROTO_ELIMIT, "DONE.outcomes[1].error: 9 bytes, limit 8");
    free(buf);

    /* limits above the ceilings are clamped to the ceilings */
    uint8_t *big = calloc(1, PROTO_MAX_GENOME_BYTES + 1);
    proto_job_t job = {.job_id = 1, .plugin = "p", .params = "{}",
                       .genome_len = PROTO_MAX_GENOME_BYTES + 1, .genome = big};
    proto_msg_t jm = {.type = PROTO_JOBS};
    jm.u.jobs = (proto_jobs_t){.n_jobs = 1, .jobs = &job};
    buf = fx_encode(&jm, &len);
    lim = proto_limits_default();
    lim.genome_bytes = UINT32_MAX;
    fx_expect_refused(buf, len, &lim, PROTO_ELIMIT, "JOBS.jobs[0].genome: 1048577 bytes, limit 1048576");
    free(buf);
    free(big);
}

/* Declared counts far beyond the bytes present are refused before any
 * allocation (a decoder that trusted 0xffffffff would try to reserve it). */
static void test_huge_declared_counts(void **state)
{
    (void)state;
    /* top level: array 32 (0xdd) of 0xffffffff elements */
    static const uint8_t top[] = {0xdd, 0xff, 0xff, 0xff, 0xff, 0x02, 0x28};
    fx_expect_refused(top, sizeof top, NULL, PROTO_ECOUNT, "HEARTBEAT");
    /* ACK tags: array 32 of 0xffffffff: past PROTO_MAX_LIST */
    static const uint8_t ack[] = {0x94, 0x02, 0x02, 0xa1, 'r', 0xdd, 0xff, 0xff, 0xff, 0xff, 0x01};
    fx_expect_refused(ack, sizeof ack, NULL, PROTO_ELIMIT, "ACK.tags: 4294967295 elements");
    /* ACK tags: 1000 declared (within the limit), 1 byte present */
    static const uint8_t ack2[] = {0x94, 0x02, 0x02, 0xa1, 'r', 0xdc, 0x03, 0xe8, 0x01};
    fx_expect_refused(ack2, sizeof ack2, NULL, PROTO_ETRUNCATED, "ACK.tags: 1000 elements declared");
    /* SUBMIT (fixarray of 13) params: str 32 (0xdb) of 0xffffffff bytes */
    static const uint8_t sub[] = {0x9d, 0x02, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                  0xa1, 'p', 0xdb, 0xff, 0xff, 0xff, 0xff, 'x'};
    fx_expect_refused(sub, sizeof sub, NULL, PROTO_ELIMIT, "SUBMIT.params: 4294967295 bytes");
    /* JOBS genome: bin 32 (0xc6) of 1000 bytes, 2 present */
    static const uint8_t jobs[] = {0x93, 0x02, 0x1e, 0x91, 0x96, 0x01, 0xa1, 'p', 0xa2, '{', '}',
                                   0x00, 0x00, 0xc6, 0x00, 0x00, 0x03, 0xe8, 0xaa, 0xbb};
    fx_expect_refused(jobs, sizeof jobs, NULL, PROTO_ETRUNCATED, "JOBS.jobs[0].genome");
    /* DONE fitness: 10 doubles declared, 2 present (each needs 9 bytes) */
    static const uint8_t done[] = {0x94, 0x02, 0x16, 0x00, 0x91, 0x97, 0x00, 0x00, 0x9a,
                                   0xcb, 0, 0, 0, 0, 0, 0, 0, 0,
                                   0xcb, 0, 0, 0, 0, 0, 0, 0, 0,
                                   0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa0};
    fx_expect_refused(done, sizeof done, NULL, PROTO_ETRUNCATED, "DONE.outcomes[0].fitness");
}

static void test_mistyped_fields(void **state)
{
    (void)state;
    /* CREDIT with credits as float 64 */
    static const uint8_t c1[] = {0x93, 0x02, 0x15, 0xcb, 0x3f, 0xf0, 0, 0, 0, 0, 0, 0};
    fx_expect_refused(c1, sizeof c1, NULL, PROTO_ETYPE, "CREDIT.credits: float 64, expected uint");
    /* negative fixint (111xxxxx) -1 */
    static const uint8_t c2[] = {0x93, 0x02, 0x15, 0xff};
    fx_expect_refused(c2, sizeof c2, NULL, PROTO_ETYPE, "CREDIT.credits: negative int");
    /* int 8 (0xd0) of -1 */
    static const uint8_t c3[] = {0x93, 0x02, 0x15, 0xd0, 0xff};
    fx_expect_refused(c3, sizeof c3, NULL, PROTO_ETYPE, "CREDIT.credits: negative int");
    /* 2^32 does not fit the 32-bit credits */
    static const uint8_t c4[] = {0x93, 0x02, 0x15, 0xcf, 0, 0, 0, 1, 0, 0, 0, 0};
    fx_expect_refused(c4, sizeof c4, NULL, PROTO_EVALUE, "CREDIT.credits: 4294967296 does not fit");
    /* nil where uint */
    static const uint8_t c5[] = {0x93, 0x02, 0x15, 0xc0};
    fx_expect_refused(c5, sizeof c5, NULL, PROTO_ETYPE, "CREDIT.credits: nil");

    /* any width of positive int is accepted: uint 64 (0xcf) and int 16 (0xd1) of 5 */
    static const uint8_t ok1[] = {0x93, 0x02, 0x15, 0xcf, 0, 0, 0, 0, 0, 0, 0, 5};
    static const uint8_t ok2[] = {0x93, 0x02, 0x15, 0xd1, 0x00, 0x05};
    static const uint8_t ok3[] = {0x93, 0xcc, 0x02, 0xcd, 0x00, 0x15, 0xce, 0, 0, 0, 5};
    const uint8_t *oks[] = {ok1, ok2, ok3};
    size_t ok_lens[] = {sizeof ok1, sizeof ok2, sizeof ok3};
    for (int i = 0; i < 3; i++) {
        proto_msg_t *d = NULL;
        proto_err_t err;
        int rc = proto_msg_decode(oks[i], ok_lens[i], NULL, &d, &err);
        if (rc)
            fail_msg("case %d: %s", i, err.text);
        assert_int_equal(d->u.credit.credits, 5);
        proto_msg_destroy(&d);
    }

    /* DONE outcome: float 32 (0xca) where float 64 is required */
    static const uint8_t d1[] = {0x94, 0x02, 0x16, 0x00, 0x91, 0x97, 0x00, 0x00, 0x91,
                                 0xca, 0x3f, 0x00, 0x00, 0x00,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa0,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0}; /* wall_seconds */
    fx_expect_refused(d1, sizeof d1, NULL, PROTO_ETYPE,
                     "DONE.outcomes[0].fitness[0]: float 32, expected float 64");
    /* DONE outcome: status 5 is past PROTO_STATUS_COUNT_ */
    static const uint8_t d2[] = {0x94, 0x02, 0x16, 0x00, 0x91, 0x97, 0x00, 0x05, 0x90,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa0,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0}; /* wall_seconds */
    fx_expect_refused(d2, sizeof d2, NULL, PROTO_EVALUE, "DONE.outcomes[0].status: status 5");
    /* DONE outcome: error text with a NUL byte */
    static const uint8_t d3[] = {0x94, 0x02, 0x16, 0x00, 0x91, 0x97, 0x00, 0x00, 0x90,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa3, 'a', 0, 'b',
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0}; /* wall_seconds */
    fx_expect_refused(d3, sizeof d3, NULL, PROTO_EVALUE, "DONE.outcomes[0].error: NUL");
    /* DONE outcome with 6 fields instead of 7 (protocol 1's, without
     * wall_seconds; spare bytes, so the array is not refused earlier for
     * having too few bytes left) */
    static const uint8_t d4[] = {0x94, 0x02, 0x16, 0x00, 0x91, 0x96, 0x00, 0x00, 0x90,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa0,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0}; /* wall_seconds */
    fx_expect_refused(d4, sizeof d4, NULL, PROTO_ECOUNT, "DONE.outcomes[0]: 6 elements, expected 7");

    /* RESULTS: cached as int 1 instead of true; key of 31 bytes; key as str */
    uint8_t r[96];
    size_t n = 0;
    r[n++] = 0x94, r[n++] = 0x02, r[n++] = 0x0b, r[n++] = 0xa0, r[n++] = 0x91, r[n++] = 0x9c;
    r[n++] = 0x00, r[n++] = 0x00;
    size_t at_cached = n;
    r[n++] = 0xc3, r[n++] = 0x00;
    size_t at_key = n;
    r[n++] = 0xc4, r[n++] = 32;
    for (int i = 0; i < 32; i++)
        r[n++] = 0x11;
    r[n++] = 0x90, r[n++] = 0xa0;
    r[n++] = 0xa0, r[n++] = 0xa0; /* worker "", host "" */
    size_t at_cpu = n;
    r[n++] = 0xcb; /* cpu_seconds 0.0 */
    for (int i = 0; i < 8; i++)
        r[n++] = 0x00;
    r[n++] = 0x00; /* peak_rss_kb 0 */
    size_t at_finished = n;
    r[n++] = 0xcb; /* finished_at 0.0 */
    for (int i = 0; i < 8; i++)
        r[n++] = 0x00;
    proto_msg_t *d = NULL;
    assert_int_equal(proto_msg_decode(r, n, NULL, &d, NULL), PROTO_OK); /* the valid form */
    assert_int_equal(d->u.results.results[0].cached, 1);
    proto_msg_destroy(&d);
    r[at_cached] = 0x01;
    fx_expect_refused(r, n, NULL, PROTO_ETYPE, "RESULTS.results[0].cached: uint, expected bool");
    r[at_cached] = 0xc3;
    r[at_key + 1] = 31;
    fx_expect_refused(r, n, NULL, PROTO_EVALUE, "RESULTS.results[0].key: 31 bytes, expected exactly 32");
    r[at_key] = 0xd9; /* str 8 of 32 bytes */
    r[at_key + 1] = 32;
    fx_expect_refused(r, n, NULL, PROTO_ETYPE, "RESULTS.results[0].key: str, expected bin");
    r[at_key] = 0xc4;
    /* a NaN (0x7ff8...) CPU time and a negative (sign bit) time stamp */
    r[at_cpu + 1] = 0x7f, r[at_cpu + 2] = 0xf8;
    fx_expect_refused(r, n, NULL, PROTO_EVALUE,
                     "RESULTS.results[0].cpu_seconds: nan, expected a finite value >= 0");
    r[at_cpu + 1] = 0x00, r[at_cpu + 2] = 0x00;
    r[at_finished + 1] = 0xbf, r[at_finished + 2] = 0xf0; /* -1.0 */
    fx_expect_refused(r, n, NULL, PROTO_EVALUE,
                     "RESULTS.results[0].finished_at: -1, expected a finite value >= 0");

    /* SUBMIT: seed_mode 2; genome as str instead of bin */
    static const uint8_t s1[] = {0x9d, 0x02, 0x01, 0xa1, 'r', 0x00, 0x02, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x90};
    fx_expect_refused(s1, sizeof s1, NULL, PROTO_EVALUE, "SUBMIT.seed_mode: 2");
    static const uint8_t s2[] = {0x9d, 0x02, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x91, 0x93, 0x00, 0x00, 0xa1, 'g'};
    fx_expect_refused(s2, sizeof s2, NULL, PROTO_ETYPE, "SUBMIT.items[0].genome: str, expected bin");
    /* replicate index at PROTO_MAX_REPLICATES (0x2710 = 10000) */
    static const uint8_t s3[] = {0x9d, 0x02, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x91, 0x93, 0x00, 0xcd, 0x27, 0x10,
                                 0xc4, 0x00};
    fx_expect_refused(s3, sizeof s3, NULL, PROTO_ELIMIT, "SUBMIT.items[0].replicate: 10000");
    /* a map where the items array belongs */
    static const uint8_t s4[] = {0x9d, 0x02, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x80};
    fx_expect_refused(s4, sizeof s4, NULL, PROTO_ETYPE, "SUBMIT.items: map, expected array");
    /* weight 0 and 1001: a run's share is 1 to PROTO_MAX_WEIGHT (1000) */
    static const uint8_t s5[] = {0x9d, 0x02, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x90, 0x00};
    fx_expect_refused(s5, sizeof s5, NULL, PROTO_EVALUE, "SUBMIT.weight: 0, expected 1 to 1000");
    static const uint8_t s6[] = {0x9d, 0x02, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x90, 0xcd, 0x03, 0xe9};
    fx_expect_refused(s6, sizeof s6, NULL, PROTO_EVALUE, "SUBMIT.weight: 1001, expected 1 to 1000");
}

/* HELLO plugin info, written by hand from the MessagePack spec: its sixth
 * element, seed_params, must be an array of at most PROTO_MAX_SEED_PARAMS
 * str; the five-element form of before is refused by count. */
static size_t s_hello_head(uint8_t *b, uint8_t info_header)
{
    size_t n = 0;
    b[n++] = 0x98; /* fixarray, 8: version, type, name, host, arch, slots, plugins, speed */
    b[n++] = 0x02, b[n++] = 0x14; /* version 2, type 20 = HELLO */
    b[n++] = 0xa1, b[n++] = 'w', b[n++] = 0xa1, b[n++] = 'h', b[n++] = 0xa1, b[n++] = 'a';
    b[n++] = 0x01; /* slots 1 */
    b[n++] = 0x91; /* fixarray, 1 plugin */
    b[n++] = info_header;
    b[n++] = 0xa1, b[n++] = 'p', b[n++] = 0xa1, b[n++] = '1'; /* name, version */
    b[n++] = 0x01, b[n++] = 0x00;                             /* objectives 1, flags 0 */
    b[n++] = 0xc4, b[n++] = 0x20; /* bin 8 of 32 bytes: digest */
    for (int i = 0; i < 32; i++)
        b[n++] = 0x11;
    return n;
}

static void test_hello_seed_params(void **state)
{
    (void)state;
    uint8_t b[256];
    size_t n = s_hello_head(b, 0x97);
    b[n++] = 0x92, b[n++] = 0xa1, b[n++] = 'x', b[n++] = 0xa1, b[n++] = 'y'; /* ["x", "y"] */
    b[n++] = 0xa7, b[n++] = '{', b[n++] = '"', b[n++] = 'x', b[n++] = '"', b[n++] = ':';
    b[n++] = '0', b[n++] = '}'; /* param_defaults {"x":0} */
    size_t at_speed = n;
    b[n++] = 0xcb, b[n++] = 0x40, b[n++] = 0x59; /* speed: float 64 of 100.0 */
    for (int i = 0; i < 6; i++)
        b[n++] = 0x00;
    proto_msg_t *d = NULL;
    proto_err_t err;
    if (proto_msg_decode(b, n, NULL, &d, &err) != PROTO_OK)
        fail_msg("valid HELLO refused: %s", err.text);
    assert_int_equal(d->u.hello.plugins[0].n_seed_params, 2);
    assert_string_equal(d->u.hello.plugins[0].seed_params[1], "y");
    assert_string_equal(d->u.hello.plugins[0].param_defaults, "{\"x\":0}");
    assert_true(d->u.hello.speed == 100.0);
    proto_msg_destroy(&d);
    /* speed: negative (-100.0, sign bit), NaN, past PROTO_MAX_SPEED (1e10 is
     * 0x4202a05f20000000), and a float 32 are refused */
    b[at_speed + 1] = 0xc0;
    fx_expect_refused(b, n, NULL, PROTO_EVALUE, "HELLO.speed: -100, expected a finite value");
    b[at_speed + 1] = 0x7f, b[at_speed + 2] = 0xf8;
    fx_expect_refused(b, n, NULL, PROTO_EVALUE, "HELLO.speed: nan, expected a finite value");
    const uint8_t big[8] = {0x42, 0x02, 0xa0, 0x5f, 0x20, 0x00, 0x00, 0x00};
    memcpy(b + at_speed + 1, big, 8);
    fx_expect_refused(b, n, NULL, PROTO_EVALUE, "HELLO.speed: 1e+10, expected a finite value");
    b[at_speed] = 0xca; /* float 32 of 0x42020000 = 32.5, then 4 trailing bytes */
    fx_expect_refused(b, n, NULL, PROTO_ETYPE, "HELLO.speed");
    /* the encoder refuses a speed the decoder would */
    proto_msg_t hm = fx_sample(PROTO_HELLO);
    hm.u.hello.speed = -1.0;
    uint8_t *hbuf = NULL;
    size_t hlen = 0;
    assert_int_equal(proto_msg_encode(&hm, &hbuf, &hlen), PROTO_EVALUE);
    assert_null(hbuf);

    n = s_hello_head(b, 0x97);
    b[n++] = 0xa1, b[n++] = 'x'; /* a str where the array belongs */
    fx_expect_refused(b, n, NULL, PROTO_ETYPE, "HELLO.plugins[0].seed_params: str, expected array");
    n = s_hello_head(b, 0x97);
    b[n++] = 0x91, b[n++] = 0x00; /* [0]: a uint where a name belongs */
    fx_expect_refused(b, n, NULL, PROTO_ETYPE, "HELLO.plugins[0].seed_params[0]: uint, expected str");
    n = s_hello_head(b, 0x97);
    b[n++] = 0xdc, b[n++] = 0x00, b[n++] = 17; /* array 16 of 17 names */
    for (int i = 0; i < 17; i++)
        b[n++] = 0xa1, b[n++] = (uint8_t)('a' + i);
    fx_expect_refused(b, n, NULL, PROTO_ELIMIT, "HELLO.plugins[0].seed_params: 17 elements, limit 16");
    n = s_hello_head(b, 0x97);
    b[n++] = 0x91, b[n++] = 0xa5, b[n++] = 'a', b[n++] = 'b', b[n++] = 'c', b[n++] = 'd', b[n++] = 'e';
    proto_limits_t lim = proto_limits_default();
    lim.name_bytes = 4;
    fx_expect_refused(b, n, &lim, PROTO_ELIMIT, "seed_params[0]: 5 bytes, limit 4");
    n = s_hello_head(b, 0x96); /* the older six-element form, without param_defaults */
    b[n++] = 0x90;             /* seed_params [] */
    b[n++] = 0x00;             /* a spare byte, so the count is what is refused */
    fx_expect_refused(b, n, NULL, PROTO_ECOUNT, "HELLO.plugins[0]: 6 elements, expected 7");
    /* the encoder refuses a count without names */
    proto_msg_t m = fx_sample(PROTO_HELLO);
    proto_plugin_info_t pi = m.u.hello.plugins[1];
    pi.seed_params = NULL;
    m.u.hello.plugins = &pi;
    m.u.hello.n_plugins = 1;
    uint8_t *buf = NULL;
    size_t len = 0;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    assert_null(buf);
}

/* STATUS: a worker's medians must be one finite value >= 0 per plugin. */
static void test_status_medians(void **state)
{
    (void)state;
    uint8_t b[64];
    size_t n = 0;
    b[n++] = 0x95, b[n++] = 0x02, b[n++] = 0x0d; /* [v 2, STATUS, workers, runs, warnings] */
    b[n++] = 0x91, b[n++] = 0x99;                 /* one worker of 9 fields */
    b[n++] = 0xa0, b[n++] = 0xa0, b[n++] = 0xa0;  /* name, host, arch "" */
    b[n++] = 0x00, b[n++] = 0x00;                 /* slots 0, busy 0 */
    b[n++] = 0x91, b[n++] = 0xa1, b[n++] = 'a';   /* plugins ["a"] */
    b[n++] = 0xcb;                                /* speed: float 64 0.0 */
    for (int i = 0; i < 8; i++)
        b[n++] = 0x00;
    b[n++] = 0xa0; /* state "" */
    size_t at = n;
    b[n++] = 0x90;                   /* medians [] : one short */
    b[n++] = 0x90, b[n++] = 0x90;    /* runs [], warnings [] */
    fx_expect_refused(b, n, NULL, PROTO_EVALUE, "STATUS.workers[0].medians: 0 values for 1 plugins");
    /* medians [-1.0]: float 64 0xbff0000000000000 */
    uint8_t c[80];
    memcpy(c, b, at);
    size_t m = at;
    c[m++] = 0x91, c[m++] = 0xcb, c[m++] = 0xbf, c[m++] = 0xf0;
    for (int i = 0; i < 6; i++)
        c[m++] = 0x00;
    c[m++] = 0x90, c[m++] = 0x90;
    fx_expect_refused(c, m, NULL, PROTO_EVALUE, "medians[0]: -1, expected a finite value >= 0");
    /* medians [0.5] decodes */
    c[at + 2] = 0x3f, c[at + 3] = 0xe0;
    proto_msg_t *d = NULL;
    proto_err_t err;
    if (proto_msg_decode(c, m, NULL, &d, &err) != PROTO_OK)
        fail_msg("%s", err.text);
    assert_true(d->u.status.workers[0].medians[0] == 0.5);
    proto_msg_destroy(&d);
}

static void test_envelope_errors(void **state)
{
    (void)state;
    static const uint8_t trailing[] = {0x92, 0x02, 0x28, 0x00};
    fx_expect_refused(trailing, sizeof trailing, NULL, PROTO_ETRAILING, "HEARTBEAT: 1 bytes after");
    static const uint8_t v1[] = {0x92, 0x01, 0x28}; /* before CANCEL and wall_seconds */
    fx_expect_refused(v1, sizeof v1, NULL, PROTO_EVERSION, "version 1");
    static const uint8_t v3[] = {0x92, 0x03, 0x28};
    fx_expect_refused(v3, sizeof v3, NULL, PROTO_EVERSION, "version 3");
    static const uint8_t v0[] = {0x92, 0x00, 0x28};
    fx_expect_refused(v0, sizeof v0, NULL, PROTO_EVERSION, "version 0");
    static const uint8_t unknown[] = {0x92, 0x02, 0x63};
    fx_expect_refused(unknown, sizeof unknown, NULL, PROTO_EUNKNOWN, "type 99");
    static const uint8_t huge_type[] = {0x92, 0x02, 0xcf, 0, 0, 0, 1, 0, 0, 0, 0x28};
    fx_expect_refused(huge_type, sizeof huge_type, NULL, PROTO_EUNKNOWN, "type 4294967336");
    static const uint8_t not_array[] = {0x81, 0x01, 0x28};
    fx_expect_refused(not_array, sizeof not_array, NULL, PROTO_ETYPE, "map, expected array");
    static const uint8_t one[] = {0x91, 0x01};
    fx_expect_refused(one, sizeof one, NULL, PROTO_ECOUNT, "expected at least 2");
    static const uint8_t count[] = {0x93, 0x02, 0x28, 0x00}; /* HEARTBEAT with a field */
    fx_expect_refused(count, sizeof count, NULL, PROTO_ECOUNT, "HEARTBEAT: 3 elements, expected 2");
    fx_expect_refused(NULL, 0, NULL, PROTO_ETRUNCATED, NULL);
    static const uint8_t empty[1] = {0};
    fx_expect_refused(empty, 0, NULL, PROTO_ETRUNCATED, NULL);
    /* err may be NULL */
    proto_msg_t *d = NULL;
    assert_int_equal(proto_msg_decode(v3, sizeof v3, NULL, &d, NULL), PROTO_EVERSION);
    assert_null(d);
}

static void test_encode_refuses_invalid(void **state)
{
    (void)state;
    uint8_t *buf = (uint8_t *)(uintptr_t)1;
    size_t len = 99;
    proto_msg_t m = fx_sample(PROTO_SUBMIT);
    m.u.submit.run_id = NULL;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    assert_null(buf);
    assert_int_equal(len, 0);
    m = fx_sample(PROTO_SUBMIT);
    m.u.submit.seed_mode = 2;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    m = fx_sample(PROTO_SUBMIT);
    m.u.submit.items = NULL;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    m = fx_sample(PROTO_DONE);
    m.u.done.outcomes[0].status = PROTO_STATUS_COUNT_;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    m = fx_sample(PROTO_RESULTS);
    m.u.results.results[0].cached = 2;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    m = fx_sample(PROTO_JOBS);
    m.u.jobs.jobs[0].genome = NULL; /* genome_len 5 */
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    proto_msg_t unknown = {.type = 99};
    assert_int_equal(proto_msg_encode(&unknown, &buf, &len), PROTO_EVALUE);
    assert_null(buf);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_every_truncation_fails),
        cmocka_unit_test(test_limits_lowered),
        cmocka_unit_test(test_huge_declared_counts),
        cmocka_unit_test(test_mistyped_fields),
        cmocka_unit_test(test_hello_seed_params),
        cmocka_unit_test(test_status_medians),
        cmocka_unit_test(test_envelope_errors),
        cmocka_unit_test(test_encode_refuses_invalid),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
