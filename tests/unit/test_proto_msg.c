/* test_proto_msg.c: the wire messages (proto/msg.h). Round trips of every
 * message type with edge values, golden byte strings written by hand from the
 * MessagePack specification (msgpack.org, spec.md), and a decoder that must
 * refuse every truncation, every oversize, every mistyped field, trailing
 * bytes, wrong versions and unknown types, cleanly and naming the field. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "proto/msg.h"

/* ---- helpers ------------------------------------------------------------ */

static uint64_t s_bits(double d)
{
    uint64_t u;
    memcpy(&u, &d, sizeof u);
    return u;
}

static double s_from_bits(uint64_t u)
{
    double d;
    memcpy(&d, &u, sizeof d);
    return d;
}

/* Encodes m, decodes it, re-encodes the result and checks the two encodings
 * are the same bytes: every field the encoder writes survived decoding.
 * Returns the decoded message (caller destroys it). */
static proto_msg_t *s_round_trip(const proto_msg_t *m)
{
    uint8_t *a = NULL, *b = NULL;
    size_t alen = 0, blen = 0;
    proto_msg_t *d = NULL;
    proto_err_t err;

    assert_int_equal(proto_msg_encode(m, &a, &alen), PROTO_OK);
    int rc = proto_msg_decode(a, alen, NULL, &d, &err);
    if (rc != PROTO_OK)
        fail_msg("decode of %s failed: %s", proto_type_name((int)m->type), err.text);
    assert_non_null(d);
    assert_int_equal(d->type, m->type);
    assert_int_equal(proto_msg_encode(d, &b, &blen), PROTO_OK);
    assert_int_equal(alen, blen);
    assert_memory_equal(a, b, alen);
    free(a);
    free(b);
    return d;
}

/* Decodes bytes that must be refused with code; checks the error text
 * contains want (a field path) and that nothing is returned. */
static void s_expect_refused(const uint8_t *buf, size_t len, const proto_limits_t *lim, int code,
                             const char *want)
{
    proto_msg_t *d = (proto_msg_t *)(uintptr_t)1; /* must be overwritten with NULL */
    proto_err_t err;
    int rc = proto_msg_decode(buf, len, lim, &d, &err);
    if (rc != code)
        fail_msg("expected code %d, got %d (%s)", code, rc, err.text);
    assert_null(d);
    assert_int_equal(err.code, code);
    if (want && !strstr(err.text, want))
        fail_msg("error text \"%s\" does not name \"%s\"", err.text, want);
}

/* Encodes m and returns the bytes (caller frees). */
static uint8_t *s_encode(const proto_msg_t *m, size_t *len)
{
    uint8_t *buf = NULL;
    assert_int_equal(proto_msg_encode(m, &buf, len), PROTO_OK);
    return buf;
}

/* Sample messages of every type, on the stack; pointers to static data. */
static uint8_t s_genome_a[] = {0x00, 0x01, 0xfe, 0xff, 0x00};
static double s_fit[] = {0.0, -0.0, 1.5, 4.9406564584124654e-324 /* smallest subnormal */,
                         1.7976931348623157e308};
static proto_item_t s_items[] = {
    {.tag = 0, .replicate = 0, .genome_len = 0, .genome = NULL},
    {.tag = UINT64_MAX, .replicate = PROTO_MAX_REPLICATES - 1, .genome_len = sizeof s_genome_a,
     .genome = s_genome_a},
    {.tag = 128, .replicate = 7, .genome_len = 3, .genome = s_genome_a},
};
static uint64_t s_tags[] = {0, 1, 127, 128, 255, 256, 65535, 65536, UINT32_MAX,
                            (uint64_t)UINT32_MAX + 1, UINT64_MAX};
static char *s_plugins_a[] = {"zdt1@1.0", "granular@2.3"};
static char *s_warnings[] = {"two builds of zdt1@1.0 in the pool", ""};
static char *s_seed_params[] = {"scatter_radius", "jitter"};

static proto_msg_t s_sample(uint32_t type)
{
    static proto_result_t results[2];
    static proto_worker_info_t workers[2];
    static proto_run_info_t runs[1];
    static proto_plugin_info_t pinfo[2];
    static proto_outcome_t outcomes[2];
    static proto_job_t jobs[2];
    proto_msg_t m;
    memset(&m, 0, sizeof m);
    m.type = type;
    switch (type) {
    case PROTO_SUBMIT:
        m.u.submit = (proto_submit_t){.run_id = "run-1", .run_seed = UINT64_MAX,
                                      .seed_mode = PROTO_SEED_COMMON,
                                      .flags = PROTO_SUBMIT_NO_CACHE | PROTO_SUBMIT_REPLAY,
                                      .timeout_ms = UINT32_MAX, .attempts = 7,
                                      .batch_tag = 0, .plugin = "zdt1",
                                      .params = "{\"n\":30}", .n_items = 3, .items = s_items};
        break;
    case PROTO_ACK:
        m.u.ack = (proto_ack_t){.run_id = "", .n_tags = sizeof s_tags / sizeof s_tags[0],
                                .tags = s_tags};
        break;
    case PROTO_ACCEPTED:
        m.u.accepted = (proto_accepted_t){.run_id = "r", .batch_tag = UINT64_MAX,
                                          .n_accepted = UINT32_MAX};
        break;
    case PROTO_RESULTS:
        memset(results, 0, sizeof results);
        results[0] = (proto_result_t){.tag = 5, .status = PROTO_STATUS_OK, .cached = 1,
                                      .seed = UINT64_MAX, .n_fitness = 5, .fitness = s_fit,
                                      .error = "", .worker = "lab-3.1", .host = "lab-3",
                                      .cpu_seconds = 0.25, .peak_rss_kb = UINT64_MAX,
                                      .finished_at = 1795000000.5};
        for (unsigned i = 0; i < PROTO_KEY_BYTES; i++)
            results[0].key[i] = (uint8_t)(i * 7);
        results[1] = (proto_result_t){.tag = 0, .status = PROTO_STATUS_TIMEOUT, .cached = 0,
                                      .seed = 0, .n_fitness = 0, .fitness = NULL,
                                      .error = "ran past 5000 ms", .worker = "",
                                      .host = ""};
        m.u.results = (proto_results_t){.run_id = "run-1", .n_results = 2, .results = results};
        break;
    case PROTO_REFUSED:
        m.u.refused = (proto_refused_t){.code = PROTO_REFUSE_UNKNOWN_PLUGIN, .batch_tag = 3,
                                        .run_id = "", .text = "pool has: zdt1@1.0",
                                        .has_tag = 1, .tag = 41};
        break;
    case PROTO_STATUS:
        workers[0] = (proto_worker_info_t){.name = "w1", .host = "lab-3", .arch = "x86_64",
                                           .slots = 8, .busy = 3, .n_plugins = 2,
                                           .plugins = s_plugins_a, .speed = 812.5,
                                           .state = "active"};
        workers[1] = (proto_worker_info_t){.name = "", .host = "", .arch = "", .slots = 0,
                                           .busy = 0, .n_plugins = 0, .plugins = NULL,
                                           .speed = PROTO_MAX_SPEED,
                                           .state = "paused: outside --hours 08:00-18:00"};
        runs[0] = (proto_run_info_t){.run_id = "run-1", .queued = UINT64_MAX, .running = 0,
                                     .done = 1u << 20, .evaluated = 5, .cached = UINT64_MAX - 1,
                                     .failed = 3};
        m.u.status = (proto_status_t){.n_workers = 2, .workers = workers, .n_runs = 1,
                                      .runs = runs, .n_warnings = 2, .warnings = s_warnings};
        break;
    case PROTO_HELLO:
        pinfo[0] = (proto_plugin_info_t){.name = "zdt1", .version = "1.0", .objectives = 2,
                                         .flags = PROTO_PLUGIN_DETERMINISTIC};
        memset(pinfo[0].digest, 0xab, PROTO_DIGEST_BYTES);
        pinfo[1] = (proto_plugin_info_t){.name = "granular", .version = "2.3",
                                         .objectives = PROTO_MAX_OBJECTIVES, .flags = 0,
                                         .n_seed_params = 2, .seed_params = s_seed_params,
                                         .param_defaults = "{\"jitter\":0.01,\"n\":30}"};
        m.u.hello = (proto_hello_t){.name = "w1", .host = "lab-3", .arch = "x86_64",
                                    .slots = UINT32_MAX, .n_plugins = 2, .plugins = pinfo,
                                    .speed = 812.5};
        break;
    case PROTO_HAND_BACK:
        m.u.hand_back = (proto_hand_back_t){.reason = "load 3.10 above --max-load 2",
                                            .n_jobs = sizeof s_tags / sizeof s_tags[0],
                                            .job_ids = s_tags};
        break;
    case PROTO_CREDIT:
        m.u.credit.credits = 256;
        break;
    case PROTO_DONE:
        outcomes[0] = (proto_outcome_t){.job_id = 1, .status = PROTO_STATUS_OK, .n_fitness = 5,
                                        .fitness = s_fit, .cpu_seconds = -0.0,
                                        .peak_rss_kb = UINT64_MAX, .error = ""};
        outcomes[1] = (proto_outcome_t){.job_id = UINT64_MAX, .status = PROTO_STATUS_CRASHED,
                                        .n_fitness = 0, .fitness = NULL, .cpu_seconds = 0.25,
                                        .peak_rss_kb = 0, .error = "signal 11"};
        m.u.done = (proto_done_t){.credits = 0, .n_outcomes = 2, .outcomes = outcomes};
        break;
    case PROTO_JOBS:
        jobs[0] = (proto_job_t){.job_id = 42, .plugin = "zdt1", .params = "{}", .seed = 1,
                                .timeout_ms = 0, .genome_len = sizeof s_genome_a,
                                .genome = s_genome_a};
        jobs[1] = (proto_job_t){.job_id = 0, .plugin = "g", .params = "{\"a\":[1,2]}",
                                .seed = UINT64_MAX, .timeout_ms = UINT32_MAX, .genome_len = 0,
                                .genome = NULL};
        m.u.jobs = (proto_jobs_t){.n_jobs = 2, .jobs = jobs};
        break;
    default: /* STATUS_REQ, BYE, REHELLO, HEARTBEAT: no fields */
        break;
    }
    return m;
}

static const uint32_t s_all_types[] = {
    PROTO_SUBMIT, PROTO_ACK,    PROTO_STATUS_REQ, PROTO_ACCEPTED, PROTO_RESULTS,
    PROTO_REFUSED, PROTO_STATUS, PROTO_HELLO,     PROTO_CREDIT,   PROTO_DONE,
    PROTO_BYE,    PROTO_JOBS,   PROTO_REHELLO,    PROTO_HEARTBEAT, PROTO_HAND_BACK,
};
#define N_TYPES (sizeof s_all_types / sizeof s_all_types[0])

/* ---- usage example ------------------------------------------------------ */

/* How a worker reports finished jobs and how the broker reads them. */
static void test_usage_example(void **state)
{
    (void)state;
    double fitness[2] = {0.25, 3.5};
    proto_outcome_t outcome = {.job_id = 17, .status = PROTO_STATUS_OK, .n_fitness = 2,
                               .fitness = fitness, .cpu_seconds = 0.125, .peak_rss_kb = 2048,
                               .error = ""};
    proto_msg_t msg = {.type = PROTO_DONE};
    msg.u.done.credits = 1;
    msg.u.done.n_outcomes = 1;
    msg.u.done.outcomes = &outcome;

    uint8_t *bytes = NULL;
    size_t len = 0;
    assert_int_equal(proto_msg_encode(&msg, &bytes, &len), PROTO_OK); /* send bytes[0..len) */

    proto_msg_t *got = NULL;
    proto_err_t err;
    assert_int_equal(proto_msg_decode(bytes, len, NULL, &got, &err), PROTO_OK);
    assert_int_equal(got->type, PROTO_DONE);
    assert_int_equal(got->u.done.credits, 1);
    assert_int_equal(got->u.done.n_outcomes, 1);
    assert_int_equal(got->u.done.outcomes[0].job_id, 17);
    assert_true(got->u.done.outcomes[0].fitness[1] == 3.5);
    assert_string_equal(proto_type_name((int)got->type), "DONE");
    proto_msg_destroy(&got);
    assert_null(got);
    free(bytes);
}

/* ---- round trips -------------------------------------------------------- */

static void test_round_trip_every_type(void **state)
{
    (void)state;
    for (size_t t = 0; t < N_TYPES; t++) {
        proto_msg_t m = s_sample(s_all_types[t]);
        proto_msg_t *d = s_round_trip(&m);
        assert_string_not_equal(proto_type_name((int)d->type), "?");
        proto_msg_destroy(&d);
    }
}

/* Edge values survive bit for bit: full u64 range, empty arrays and strings,
 * -0.0 (sign bit), subnormals, NaN payloads (IEEE 754: a quiet NaN with a
 * payload is still one of 2^52 distinct values). */
static void test_round_trip_edge_values(void **state)
{
    (void)state;
    double fit[4] = {-0.0, 4.9406564584124654e-324, s_from_bits(0x7ff8000000000123ull),
                     s_from_bits(0xfff0000000000001ull) /* signalling NaN, sign set */};
    proto_result_t r = {.tag = UINT64_MAX, .status = PROTO_STATUS_FAILED, .cached = 1,
                        .seed = UINT64_MAX, .n_fitness = 4, .fitness = fit, .error = "",
                        .worker = "", .host = ""};
    memset(r.key, 0xff, sizeof r.key);
    proto_msg_t m = {.type = PROTO_RESULTS};
    m.u.results = (proto_results_t){.run_id = "", .n_results = 1, .results = &r};
    proto_msg_t *d = s_round_trip(&m);
    const proto_result_t *g = &d->u.results.results[0];
    assert_int_equal(g->tag, UINT64_MAX);
    assert_int_equal(g->seed, UINT64_MAX);
    assert_int_equal(g->cached, 1);
    assert_int_equal(g->n_fitness, 4);
    for (int i = 0; i < 4; i++)
        assert_int_equal(s_bits(g->fitness[i]), s_bits(fit[i]));
    assert_string_equal(d->u.results.run_id, "");
    assert_string_equal(g->error, "");
    proto_msg_destroy(&d);

    /* empty arrays everywhere */
    proto_msg_t empties[] = {{.type = PROTO_SUBMIT}, {.type = PROTO_ACK}, {.type = PROTO_RESULTS},
                             {.type = PROTO_STATUS}, {.type = PROTO_HELLO}, {.type = PROTO_DONE},
                             {.type = PROTO_JOBS}};
    empties[0].u.submit = (proto_submit_t){.run_id = "", .plugin = "", .params = ""};
    empties[1].u.ack.run_id = "";
    empties[2].u.results.run_id = "";
    empties[4].u.hello = (proto_hello_t){.name = "", .host = "", .arch = ""};
    for (size_t i = 0; i < sizeof empties / sizeof empties[0]; i++) {
        d = s_round_trip(&empties[i]);
        proto_msg_destroy(&d);
    }

    /* a genome at exactly the default limit is accepted */
    uint8_t *big = calloc(1, PROTO_MAX_GENOME_BYTES);
    assert_non_null(big);
    big[PROTO_MAX_GENOME_BYTES - 1] = 0x5a;
    proto_job_t job = {.job_id = 1, .plugin = "p", .params = "{}", .seed = 2,
                       .genome_len = PROTO_MAX_GENOME_BYTES, .genome = big};
    proto_msg_t jm = {.type = PROTO_JOBS};
    jm.u.jobs = (proto_jobs_t){.n_jobs = 1, .jobs = &job};
    d = s_round_trip(&jm);
    assert_int_equal(d->u.jobs.jobs[0].genome_len, PROTO_MAX_GENOME_BYTES);
    assert_memory_equal(d->u.jobs.jobs[0].genome, big, PROTO_MAX_GENOME_BYTES);
    proto_msg_destroy(&d);
    free(big);
}

/* The decoded fields of a sample equal what was encoded (s_round_trip checks
 * bytes; this checks the struct a caller reads). */
static void test_decoded_fields(void **state)
{
    (void)state;
    proto_msg_t m = s_sample(PROTO_SUBMIT);
    proto_msg_t *d = s_round_trip(&m);
    const proto_submit_t *s = &d->u.submit;
    assert_string_equal(s->run_id, "run-1");
    assert_int_equal(s->run_seed, UINT64_MAX);
    assert_int_equal(s->seed_mode, PROTO_SEED_COMMON);
    assert_int_equal(s->flags, 3);
    assert_int_equal(s->timeout_ms, UINT32_MAX);
    assert_int_equal(s->attempts, 7);
    assert_string_equal(s->plugin, "zdt1");
    assert_string_equal(s->params, "{\"n\":30}");
    assert_int_equal(s->n_items, 3);
    assert_int_equal(s->weight, 1); /* 0 is sent as 1 */
    assert_int_equal(s->items[0].genome_len, 0);
    assert_null(s->items[0].genome);
    assert_int_equal(s->items[1].tag, UINT64_MAX);
    assert_int_equal(s->items[1].replicate, PROTO_MAX_REPLICATES - 1);
    assert_memory_equal(s->items[1].genome, s_genome_a, sizeof s_genome_a);
    proto_msg_destroy(&d);

    m = s_sample(PROTO_STATUS);
    d = s_round_trip(&m);
    assert_int_equal(d->u.status.n_workers, 2);
    assert_string_equal(d->u.status.workers[0].plugins[1], "granular@2.3");
    assert_int_equal(d->u.status.runs[0].queued, UINT64_MAX);
    assert_int_equal(d->u.status.runs[0].evaluated, 5);
    assert_int_equal(d->u.status.runs[0].cached, UINT64_MAX - 1);
    assert_int_equal(d->u.status.runs[0].failed, 3);
    assert_string_equal(d->u.status.warnings[0], "two builds of zdt1@1.0 in the pool");
    assert_true(d->u.status.workers[0].speed == 812.5);
    assert_true(d->u.status.workers[1].speed == PROTO_MAX_SPEED);
    assert_string_equal(d->u.status.workers[0].state, "active");
    assert_string_equal(d->u.status.workers[1].state, "paused: outside --hours 08:00-18:00");
    proto_msg_destroy(&d);

    m = s_sample(PROTO_HAND_BACK);
    d = s_round_trip(&m);
    assert_string_equal(d->u.hand_back.reason, "load 3.10 above --max-load 2");
    assert_int_equal(d->u.hand_back.n_jobs, sizeof s_tags / sizeof s_tags[0]);
    for (uint32_t i = 0; i < d->u.hand_back.n_jobs; i++)
        assert_int_equal(d->u.hand_back.job_ids[i], s_tags[i]);
    proto_msg_destroy(&d);

    m = s_sample(PROTO_HELLO);
    d = s_round_trip(&m);
    assert_int_equal(d->u.hello.plugins[0].flags, PROTO_PLUGIN_DETERMINISTIC);
    assert_int_equal(d->u.hello.plugins[0].digest[31], 0xab);
    assert_int_equal(d->u.hello.slots, UINT32_MAX);
    assert_int_equal(d->u.hello.plugins[0].n_seed_params, 0);
    assert_null(d->u.hello.plugins[0].seed_params);
    assert_int_equal(d->u.hello.plugins[1].n_seed_params, 2);
    assert_string_equal(d->u.hello.plugins[1].seed_params[0], "scatter_radius");
    assert_string_equal(d->u.hello.plugins[1].seed_params[1], "jitter");
    assert_true(d->u.hello.speed == 812.5);
    proto_msg_destroy(&d);
}

/* ---- golden bytes (MessagePack spec, msgpack.org spec.md) --------------- */

static void s_expect_bytes(const proto_msg_t *m, const uint8_t *want, size_t want_len)
{
    size_t len;
    uint8_t *got = s_encode(m, &len);
    assert_int_equal(len, want_len);
    assert_memory_equal(got, want, len);
    free(got);
}

static void test_golden_heartbeat_and_credit(void **state)
{
    (void)state;
    static const uint8_t heartbeat[] = {
        0x92, /* fixarray (1001xxxx) with 2 elements */
        0x01, /* positive fixint (0xxxxxxx): version 1 */
        0x28, /* positive fixint: type 40 = HEARTBEAT */
    };
    proto_msg_t hb = {.type = PROTO_HEARTBEAT};
    s_expect_bytes(&hb, heartbeat, sizeof heartbeat);

    static const uint8_t credit[] = {
        0x93,             /* fixarray, 3 elements */
        0x01,             /* positive fixint: version 1 */
        0x15,             /* positive fixint: type 21 = CREDIT */
        0xcd, 0x01, 0x00, /* uint 16 (0xcd) + 2 bytes big-endian: 256 (> 255, so not uint 8) */
    };
    proto_msg_t cr = {.type = PROTO_CREDIT};
    cr.u.credit.credits = 256;
    s_expect_bytes(&cr, credit, sizeof credit);

    /* and the decoder reads the hand-written bytes back */
    proto_msg_t *d = NULL;
    assert_int_equal(proto_msg_decode(credit, sizeof credit, NULL, &d, NULL), PROTO_OK);
    assert_int_equal(d->u.credit.credits, 256);
    proto_msg_destroy(&d);
}

static void test_golden_done(void **state)
{
    (void)state;
    static const uint8_t done[] = {
        0x94,       /* fixarray, 4 elements: version, type, credits, outcomes */
        0x01,       /* positive fixint: version 1 */
        0x16,       /* positive fixint: type 22 = DONE */
        0x02,       /* positive fixint: credits 2 */
        0x91,       /* fixarray, 1 outcome */
        0x96,       /* fixarray, 6 fields of the outcome */
        0x07,       /* positive fixint: job_id 7 */
        0x00,       /* positive fixint: status 0 = ok */
        0x91,       /* fixarray, 1 fitness value */
        0xcb, 0x3f, 0xe0, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, /* float 64, big-endian: 0.5 */
        0xcb, 0x3f, 0xf8, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, /* float 64: cpu_seconds 1.5 */
        0xcc, 0xc8, /* uint 8 (0xcc) + 1 byte: peak_rss_kb 200 (> 127, so not fixint) */
        0xa2, 'o', 'k', /* fixstr (101xxxxx) of 2 bytes: error "ok" */
    };
    double fit = 0.5;
    proto_outcome_t o = {.job_id = 7, .status = 0, .n_fitness = 1, .fitness = &fit,
                         .cpu_seconds = 1.5, .peak_rss_kb = 200, .error = "ok"};
    proto_msg_t m = {.type = PROTO_DONE};
    m.u.done = (proto_done_t){.credits = 2, .n_outcomes = 1, .outcomes = &o};
    s_expect_bytes(&m, done, sizeof done);
}

static void test_golden_results_key_bin8(void **state)
{
    (void)state;
    uint8_t want[96];
    size_t n = 0;
    want[n++] = 0x94; /* fixarray, 4 elements: version, type, run_id, results */
    want[n++] = 0x01; /* version 1 */
    want[n++] = 0x0b; /* type 11 = RESULTS */
    want[n++] = 0xa1; /* fixstr, 1 byte */
    want[n++] = 'r';  /* run_id "r" */
    want[n++] = 0x91; /* fixarray, 1 result */
    want[n++] = 0x9c; /* fixarray, 12 fields */
    want[n++] = 0x00; /* tag 0 */
    want[n++] = 0x04; /* status 4 = timeout */
    want[n++] = 0xc2; /* false: not cached */
    want[n++] = 0xcf; /* uint 64 (0xcf) + 8 bytes big-endian: seed 2^63 */
    want[n++] = 0x80;
    for (int i = 0; i < 7; i++)
        want[n++] = 0x00;
    want[n++] = 0xc4; /* bin 8 (0xc4) + 1 length byte */
    want[n++] = 0x20; /* 32 bytes of key */
    for (int i = 0; i < 32; i++)
        want[n++] = (uint8_t)i;
    want[n++] = 0x90; /* fixarray, 0 fitness values */
    want[n++] = 0xa0; /* fixstr, 0 bytes: error "" */
    want[n++] = 0xa1; /* fixstr, 1 byte: worker "w" */
    want[n++] = 'w';
    want[n++] = 0xa0; /* fixstr, 0 bytes: host "" */
    want[n++] = 0xcb; /* float 64 (0xcb) + 8 bytes big-endian: cpu_seconds 1.5 */
    want[n++] = 0x3f;
    want[n++] = 0xf8;
    for (int i = 0; i < 6; i++)
        want[n++] = 0x00;
    want[n++] = 0x00; /* peak_rss_kb 0 */
    want[n++] = 0xcb; /* float 64: finished_at 0.0 (all bits zero) */
    for (int i = 0; i < 8; i++)
        want[n++] = 0x00;
    proto_result_t r = {.tag = 0, .status = PROTO_STATUS_TIMEOUT, .cached = 0,
                        .seed = 1ull << 63, .n_fitness = 0, .fitness = NULL, .error = "",
                        .worker = "w", .host = "", .cpu_seconds = 1.5};
    for (int i = 0; i < 32; i++)
        r.key[i] = (uint8_t)i;
    proto_msg_t m = {.type = PROTO_RESULTS};
    m.u.results = (proto_results_t){.run_id = "r", .n_results = 1, .results = &r};
    s_expect_bytes(&m, want, n);
}

/* ---- refusals ----------------------------------------------------------- */

/* Every proper prefix of every valid encoding is refused, with no leak (the
 * sanitizer build checks) and no read past the prefix (ASan: each prefix is
 * copied into a buffer of exactly its length). */
static void test_every_truncation_fails(void **state)
{
    (void)state;
    for (size_t t = 0; t < N_TYPES; t++) {
        proto_msg_t m = s_sample(s_all_types[t]);
        size_t len;
        uint8_t *full = s_encode(&m, &len);
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

    proto_msg_t m = s_sample(PROTO_SUBMIT);
    uint8_t *buf = s_encode(&m, &len);
    lim = proto_limits_default();
    lim.genome_bytes = 4; /* item 1 has 5 bytes */
    s_expect_refused(buf, len, &lim, PROTO_ELIMIT, "SUBMIT.items[1].genome: 5 bytes, limit 4");
    lim = proto_limits_default();
    lim.batch_items = 2;
    s_expect_refused(buf, len, &lim, PROTO_ELIMIT, "SUBMIT.items: 3 elements, limit 2");
    lim = proto_limits_default();
    lim.name_bytes = 4;
    s_expect_refused(buf, len, &lim, PROTO_ELIMIT, "SUBMIT.run_id: 5 bytes, limit 4");
    lim = proto_limits_default();
    lim.params_bytes = 7;
    s_expect_refused(buf, len, &lim, PROTO_ELIMIT, "SUBMIT.params: 8 bytes, limit 7");
    lim = proto_limits_default();
    lim.message_bytes = (uint32_t)len - 1;
    s_expect_refused(buf, len, &lim, PROTO_ELIMIT, "bytes, limit");
    lim.message_bytes = (uint32_t)len; /* exactly at the limit is fine */
    proto_msg_t *d = NULL;
    assert_int_equal(proto_msg_decode(buf, len, &lim, &d, NULL), PROTO_OK);
    proto_msg_destroy(&d);
    free(buf);

    m = s_sample(PROTO_DONE);
    buf = s_encode(&m, &len);
    lim = proto_limits_default();
    lim.objectives = 4;
    s_expect_refused(buf, len, &lim, PROTO_ELIMIT, "DONE.outcomes[0].fitness: 5 elements, limit 4");
    lim = proto_limits_default();
    lim.error_bytes = 8;
    s_expect_refused(buf, len, &lim, PROTO_ELIMIT, "DONE.outcomes[1].error: 9 bytes, limit 8");
    free(buf);

    /* limits above the ceilings are clamped to the ceilings */
    uint8_t *big = calloc(1, PROTO_MAX_GENOME_BYTES + 1);
    proto_job_t job = {.job_id = 1, .plugin = "p", .params = "{}",
                       .genome_len = PROTO_MAX_GENOME_BYTES + 1, .genome = big};
    proto_msg_t jm = {.type = PROTO_JOBS};
    jm.u.jobs = (proto_jobs_t){.n_jobs = 1, .jobs = &job};
    buf = s_encode(&jm, &len);
    lim = proto_limits_default();
    lim.genome_bytes = UINT32_MAX;
    s_expect_refused(buf, len, &lim, PROTO_ELIMIT, "JOBS.jobs[0].genome: 1048577 bytes, limit 1048576");
    free(buf);
    free(big);
}

/* Declared counts far beyond the bytes present are refused before any
 * allocation (a decoder that trusted 0xffffffff would try to reserve it). */
static void test_huge_declared_counts(void **state)
{
    (void)state;
    /* top level: array 32 (0xdd) of 0xffffffff elements */
    static const uint8_t top[] = {0xdd, 0xff, 0xff, 0xff, 0xff, 0x01, 0x28};
    s_expect_refused(top, sizeof top, NULL, PROTO_ECOUNT, "HEARTBEAT");
    /* ACK tags: array 32 of 0xffffffff: past PROTO_MAX_LIST */
    static const uint8_t ack[] = {0x94, 0x01, 0x02, 0xa1, 'r', 0xdd, 0xff, 0xff, 0xff, 0xff, 0x01};
    s_expect_refused(ack, sizeof ack, NULL, PROTO_ELIMIT, "ACK.tags: 4294967295 elements");
    /* ACK tags: 1000 declared (within the limit), 1 byte present */
    static const uint8_t ack2[] = {0x94, 0x01, 0x02, 0xa1, 'r', 0xdc, 0x03, 0xe8, 0x01};
    s_expect_refused(ack2, sizeof ack2, NULL, PROTO_ETRUNCATED, "ACK.tags: 1000 elements declared");
    /* SUBMIT (fixarray of 13) params: str 32 (0xdb) of 0xffffffff bytes */
    static const uint8_t sub[] = {0x9d, 0x01, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                  0xa1, 'p', 0xdb, 0xff, 0xff, 0xff, 0xff, 'x'};
    s_expect_refused(sub, sizeof sub, NULL, PROTO_ELIMIT, "SUBMIT.params: 4294967295 bytes");
    /* JOBS genome: bin 32 (0xc6) of 1000 bytes, 2 present */
    static const uint8_t jobs[] = {0x93, 0x01, 0x1e, 0x91, 0x96, 0x01, 0xa1, 'p', 0xa2, '{', '}',
                                   0x00, 0x00, 0xc6, 0x00, 0x00, 0x03, 0xe8, 0xaa, 0xbb};
    s_expect_refused(jobs, sizeof jobs, NULL, PROTO_ETRUNCATED, "JOBS.jobs[0].genome");
    /* DONE fitness: 10 doubles declared, 2 present (each needs 9 bytes) */
    static const uint8_t done[] = {0x94, 0x01, 0x16, 0x00, 0x91, 0x96, 0x00, 0x00, 0x9a,
                                   0xcb, 0, 0, 0, 0, 0, 0, 0, 0,
                                   0xcb, 0, 0, 0, 0, 0, 0, 0, 0,
                                   0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa0};
    s_expect_refused(done, sizeof done, NULL, PROTO_ETRUNCATED, "DONE.outcomes[0].fitness");
}

static void test_mistyped_fields(void **state)
{
    (void)state;
    /* CREDIT with credits as float 64 */
    static const uint8_t c1[] = {0x93, 0x01, 0x15, 0xcb, 0x3f, 0xf0, 0, 0, 0, 0, 0, 0};
    s_expect_refused(c1, sizeof c1, NULL, PROTO_ETYPE, "CREDIT.credits: float 64, expected uint");
    /* negative fixint (111xxxxx) -1 */
    static const uint8_t c2[] = {0x93, 0x01, 0x15, 0xff};
    s_expect_refused(c2, sizeof c2, NULL, PROTO_ETYPE, "CREDIT.credits: negative int");
    /* int 8 (0xd0) of -1 */
    static const uint8_t c3[] = {0x93, 0x01, 0x15, 0xd0, 0xff};
    s_expect_refused(c3, sizeof c3, NULL, PROTO_ETYPE, "CREDIT.credits: negative int");
    /* 2^32 does not fit the 32-bit credits */
    static const uint8_t c4[] = {0x93, 0x01, 0x15, 0xcf, 0, 0, 0, 1, 0, 0, 0, 0};
    s_expect_refused(c4, sizeof c4, NULL, PROTO_EVALUE, "CREDIT.credits: 4294967296 does not fit");
    /* nil where uint */
    static const uint8_t c5[] = {0x93, 0x01, 0x15, 0xc0};
    s_expect_refused(c5, sizeof c5, NULL, PROTO_ETYPE, "CREDIT.credits: nil");

    /* any width of positive int is accepted: uint 64 (0xcf) and int 16 (0xd1) of 5 */
    static const uint8_t ok1[] = {0x93, 0x01, 0x15, 0xcf, 0, 0, 0, 0, 0, 0, 0, 5};
    static const uint8_t ok2[] = {0x93, 0x01, 0x15, 0xd1, 0x00, 0x05};
    static const uint8_t ok3[] = {0x93, 0xcc, 0x01, 0xcd, 0x00, 0x15, 0xce, 0, 0, 0, 5};
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
    static const uint8_t d1[] = {0x94, 0x01, 0x16, 0x00, 0x91, 0x96, 0x00, 0x00, 0x91,
                                 0xca, 0x3f, 0x00, 0x00, 0x00,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa0};
    s_expect_refused(d1, sizeof d1, NULL, PROTO_ETYPE,
                     "DONE.outcomes[0].fitness[0]: float 32, expected float 64");
    /* DONE outcome: status 5 is past PROTO_STATUS_COUNT_ */
    static const uint8_t d2[] = {0x94, 0x01, 0x16, 0x00, 0x91, 0x96, 0x00, 0x05, 0x90,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa0};
    s_expect_refused(d2, sizeof d2, NULL, PROTO_EVALUE, "DONE.outcomes[0].status: status 5");
    /* DONE outcome: error text with a NUL byte */
    static const uint8_t d3[] = {0x94, 0x01, 0x16, 0x00, 0x91, 0x96, 0x00, 0x00, 0x90,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa3, 'a', 0, 'b'};
    s_expect_refused(d3, sizeof d3, NULL, PROTO_EVALUE, "DONE.outcomes[0].error: NUL");
    /* DONE outcome with 5 fields instead of 6 (and a spare byte, so the
     * array is not refused earlier for having too few bytes left) */
    static const uint8_t d4[] = {0x94, 0x01, 0x16, 0x00, 0x91, 0x95, 0x00, 0x00, 0x90,
                                 0xcb, 0, 0, 0, 0, 0, 0, 0, 0, 0x00, 0xa0};
    s_expect_refused(d4, sizeof d4, NULL, PROTO_ECOUNT, "DONE.outcomes[0]: 5 elements, expected 6");

    /* RESULTS: cached as int 1 instead of true; key of 31 bytes; key as str */
    uint8_t r[96];
    size_t n = 0;
    r[n++] = 0x94, r[n++] = 0x01, r[n++] = 0x0b, r[n++] = 0xa0, r[n++] = 0x91, r[n++] = 0x9c;
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
    s_expect_refused(r, n, NULL, PROTO_ETYPE, "RESULTS.results[0].cached: uint, expected bool");
    r[at_cached] = 0xc3;
    r[at_key + 1] = 31;
    s_expect_refused(r, n, NULL, PROTO_EVALUE, "RESULTS.results[0].key: 31 bytes, expected exactly 32");
    r[at_key] = 0xd9; /* str 8 of 32 bytes */
    r[at_key + 1] = 32;
    s_expect_refused(r, n, NULL, PROTO_ETYPE, "RESULTS.results[0].key: str, expected bin");
    r[at_key] = 0xc4;
    /* a NaN (0x7ff8...) CPU time and a negative (sign bit) time stamp */
    r[at_cpu + 1] = 0x7f, r[at_cpu + 2] = 0xf8;
    s_expect_refused(r, n, NULL, PROTO_EVALUE,
                     "RESULTS.results[0].cpu_seconds: nan, expected a finite value >= 0");
    r[at_cpu + 1] = 0x00, r[at_cpu + 2] = 0x00;
    r[at_finished + 1] = 0xbf, r[at_finished + 2] = 0xf0; /* -1.0 */
    s_expect_refused(r, n, NULL, PROTO_EVALUE,
                     "RESULTS.results[0].finished_at: -1, expected a finite value >= 0");

    /* SUBMIT: seed_mode 2; genome as str instead of bin */
    static const uint8_t s1[] = {0x9d, 0x01, 0x01, 0xa1, 'r', 0x00, 0x02, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x90};
    s_expect_refused(s1, sizeof s1, NULL, PROTO_EVALUE, "SUBMIT.seed_mode: 2");
    static const uint8_t s2[] = {0x9d, 0x01, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x91, 0x93, 0x00, 0x00, 0xa1, 'g'};
    s_expect_refused(s2, sizeof s2, NULL, PROTO_ETYPE, "SUBMIT.items[0].genome: str, expected bin");
    /* replicate index at PROTO_MAX_REPLICATES (0x2710 = 10000) */
    static const uint8_t s3[] = {0x9d, 0x01, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x91, 0x93, 0x00, 0xcd, 0x27, 0x10,
                                 0xc4, 0x00};
    s_expect_refused(s3, sizeof s3, NULL, PROTO_ELIMIT, "SUBMIT.items[0].replicate: 10000");
    /* a map where the items array belongs */
    static const uint8_t s4[] = {0x9d, 0x01, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x80};
    s_expect_refused(s4, sizeof s4, NULL, PROTO_ETYPE, "SUBMIT.items: map, expected array");
    /* weight 0 and 1001: a run's share is 1 to PROTO_MAX_WEIGHT (1000) */
    static const uint8_t s5[] = {0x9d, 0x01, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x90, 0x00};
    s_expect_refused(s5, sizeof s5, NULL, PROTO_EVALUE, "SUBMIT.weight: 0, expected 1 to 1000");
    static const uint8_t s6[] = {0x9d, 0x01, 0x01, 0xa1, 'r', 0x00, 0x00, 0x00, 0x00, 0x00, 0x00,
                                 0xa1, 'p', 0xa2, '{', '}', 0x90, 0xcd, 0x03, 0xe9};
    s_expect_refused(s6, sizeof s6, NULL, PROTO_EVALUE, "SUBMIT.weight: 1001, expected 1 to 1000");
}

/* HELLO plugin info, written by hand from the MessagePack spec: its sixth
 * element, seed_params, must be an array of at most PROTO_MAX_SEED_PARAMS
 * str; the five-element form of before is refused by count. */
static size_t s_hello_head(uint8_t *b, uint8_t info_header)
{
    size_t n = 0;
    b[n++] = 0x98; /* fixarray, 8: version, type, name, host, arch, slots, plugins, speed */
    b[n++] = 0x01, b[n++] = 0x14; /* version 1, type 20 = HELLO */
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
    s_expect_refused(b, n, NULL, PROTO_EVALUE, "HELLO.speed: -100, expected a finite value");
    b[at_speed + 1] = 0x7f, b[at_speed + 2] = 0xf8;
    s_expect_refused(b, n, NULL, PROTO_EVALUE, "HELLO.speed: nan, expected a finite value");
    const uint8_t big[8] = {0x42, 0x02, 0xa0, 0x5f, 0x20, 0x00, 0x00, 0x00};
    memcpy(b + at_speed + 1, big, 8);
    s_expect_refused(b, n, NULL, PROTO_EVALUE, "HELLO.speed: 1e+10, expected a finite value");
    b[at_speed] = 0xca; /* float 32 of 0x42020000 = 32.5, then 4 trailing bytes */
    s_expect_refused(b, n, NULL, PROTO_ETYPE, "HELLO.speed");
    /* the encoder refuses a speed the decoder would */
    proto_msg_t hm = s_sample(PROTO_HELLO);
    hm.u.hello.speed = -1.0;
    uint8_t *hbuf = NULL;
    size_t hlen = 0;
    assert_int_equal(proto_msg_encode(&hm, &hbuf, &hlen), PROTO_EVALUE);
    assert_null(hbuf);

    n = s_hello_head(b, 0x97);
    b[n++] = 0xa1, b[n++] = 'x'; /* a str where the array belongs */
    s_expect_refused(b, n, NULL, PROTO_ETYPE, "HELLO.plugins[0].seed_params: str, expected array");
    n = s_hello_head(b, 0x97);
    b[n++] = 0x91, b[n++] = 0x00; /* [0]: a uint where a name belongs */
    s_expect_refused(b, n, NULL, PROTO_ETYPE, "HELLO.plugins[0].seed_params[0]: uint, expected str");
    n = s_hello_head(b, 0x97);
    b[n++] = 0xdc, b[n++] = 0x00, b[n++] = 17; /* array 16 of 17 names */
    for (int i = 0; i < 17; i++)
        b[n++] = 0xa1, b[n++] = (uint8_t)('a' + i);
    s_expect_refused(b, n, NULL, PROTO_ELIMIT, "HELLO.plugins[0].seed_params: 17 elements, limit 16");
    n = s_hello_head(b, 0x97);
    b[n++] = 0x91, b[n++] = 0xa5, b[n++] = 'a', b[n++] = 'b', b[n++] = 'c', b[n++] = 'd', b[n++] = 'e';
    proto_limits_t lim = proto_limits_default();
    lim.name_bytes = 4;
    s_expect_refused(b, n, &lim, PROTO_ELIMIT, "seed_params[0]: 5 bytes, limit 4");
    n = s_hello_head(b, 0x96); /* the older six-element form, without param_defaults */
    b[n++] = 0x90;             /* seed_params [] */
    b[n++] = 0x00;             /* a spare byte, so the count is what is refused */
    s_expect_refused(b, n, NULL, PROTO_ECOUNT, "HELLO.plugins[0]: 6 elements, expected 7");
    /* the encoder refuses a count without names */
    proto_msg_t m = s_sample(PROTO_HELLO);
    proto_plugin_info_t pi = m.u.hello.plugins[1];
    pi.seed_params = NULL;
    m.u.hello.plugins = &pi;
    m.u.hello.n_plugins = 1;
    uint8_t *buf = NULL;
    size_t len = 0;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    assert_null(buf);
}

static void test_envelope_errors(void **state)
{
    (void)state;
    static const uint8_t trailing[] = {0x92, 0x01, 0x28, 0x00};
    s_expect_refused(trailing, sizeof trailing, NULL, PROTO_ETRAILING, "HEARTBEAT: 1 bytes after");
    static const uint8_t v2[] = {0x92, 0x02, 0x28};
    s_expect_refused(v2, sizeof v2, NULL, PROTO_EVERSION, "version 2");
    static const uint8_t v0[] = {0x92, 0x00, 0x28};
    s_expect_refused(v0, sizeof v0, NULL, PROTO_EVERSION, "version 0");
    static const uint8_t unknown[] = {0x92, 0x01, 0x63};
    s_expect_refused(unknown, sizeof unknown, NULL, PROTO_EUNKNOWN, "type 99");
    static const uint8_t huge_type[] = {0x92, 0x01, 0xcf, 0, 0, 0, 1, 0, 0, 0, 0x28};
    s_expect_refused(huge_type, sizeof huge_type, NULL, PROTO_EUNKNOWN, "type 4294967336");
    static const uint8_t not_array[] = {0x81, 0x01, 0x28};
    s_expect_refused(not_array, sizeof not_array, NULL, PROTO_ETYPE, "map, expected array");
    static const uint8_t one[] = {0x91, 0x01};
    s_expect_refused(one, sizeof one, NULL, PROTO_ECOUNT, "expected at least 2");
    static const uint8_t count[] = {0x93, 0x01, 0x28, 0x00}; /* HEARTBEAT with a field */
    s_expect_refused(count, sizeof count, NULL, PROTO_ECOUNT, "HEARTBEAT: 3 elements, expected 2");
    s_expect_refused(NULL, 0, NULL, PROTO_ETRUNCATED, NULL);
    static const uint8_t empty[1] = {0};
    s_expect_refused(empty, 0, NULL, PROTO_ETRUNCATED, NULL);
    /* err may be NULL */
    proto_msg_t *d = NULL;
    assert_int_equal(proto_msg_decode(v2, sizeof v2, NULL, &d, NULL), PROTO_EVERSION);
    assert_null(d);
}

static void test_encode_refuses_invalid(void **state)
{
    (void)state;
    uint8_t *buf = (uint8_t *)(uintptr_t)1;
    size_t len = 99;
    proto_msg_t m = s_sample(PROTO_SUBMIT);
    m.u.submit.run_id = NULL;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    assert_null(buf);
    assert_int_equal(len, 0);
    m = s_sample(PROTO_SUBMIT);
    m.u.submit.seed_mode = 2;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    m = s_sample(PROTO_SUBMIT);
    m.u.submit.items = NULL;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    m = s_sample(PROTO_DONE);
    m.u.done.outcomes[0].status = PROTO_STATUS_COUNT_;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    m = s_sample(PROTO_RESULTS);
    m.u.results.results[0].cached = 2;
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    m = s_sample(PROTO_JOBS);
    m.u.jobs.jobs[0].genome = NULL; /* genome_len 5 */
    assert_int_equal(proto_msg_encode(&m, &buf, &len), PROTO_EVALUE);
    proto_msg_t unknown = {.type = 99};
    assert_int_equal(proto_msg_encode(&unknown, &buf, &len), PROTO_EVALUE);
    assert_null(buf);
}

/* A message built by hand from malloc'd pieces is freed by proto_msg_destroy;
 * NULL and an already-destroyed pointer are accepted. */
static void test_destroy_hand_built(void **state)
{
    (void)state;
    proto_msg_t *m = calloc(1, sizeof *m);
    m->type = PROTO_ACK;
    m->u.ack.run_id = strdup("run");
    m->u.ack.n_tags = 2;
    m->u.ack.tags = calloc(2, sizeof(uint64_t));
    proto_msg_destroy(&m);
    assert_null(m);
    proto_msg_destroy(&m);
    proto_msg_destroy(NULL);
}

static void test_names(void **state)
{
    (void)state;
    assert_string_equal(proto_type_name(PROTO_SUBMIT), "SUBMIT");
    assert_string_equal(proto_type_name(PROTO_HEARTBEAT), "HEARTBEAT");
    assert_string_equal(proto_type_name(0), "?");
    assert_string_equal(proto_status_name(PROTO_STATUS_OK), "ok");
    assert_string_equal(proto_status_name(PROTO_STATUS_TIMEOUT), "timeout");
    assert_string_equal(proto_status_name(-1), "unknown");
    assert_string_equal(proto_status_name(PROTO_STATUS_COUNT_), "unknown");
    proto_limits_t lim = proto_limits_default();
    assert_int_equal(lim.genome_bytes, PROTO_MAX_GENOME_BYTES);
    assert_int_equal(lim.objectives, PROTO_MAX_OBJECTIVES);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_round_trip_every_type),
        cmocka_unit_test(test_round_trip_edge_values),
        cmocka_unit_test(test_decoded_fields),
        cmocka_unit_test(test_golden_heartbeat_and_credit),
        cmocka_unit_test(test_golden_done),
        cmocka_unit_test(test_golden_results_key_bin8),
        cmocka_unit_test(test_every_truncation_fails),
        cmocka_unit_test(test_limits_lowered),
        cmocka_unit_test(test_huge_declared_counts),
        cmocka_unit_test(test_mistyped_fields),
        cmocka_unit_test(test_hello_seed_params),
        cmocka_unit_test(test_envelope_errors),
        cmocka_unit_test(test_encode_refuses_invalid),
        cmocka_unit_test(test_destroy_hand_built),
        cmocka_unit_test(test_names),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
