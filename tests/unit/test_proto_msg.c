/* test_proto_msg.c: the wire messages (proto/msg.h), what must get through.
 * Round trips of every message type with edge values, decoded fields against
 * what was encoded, and golden byte strings written by hand from the
 * MessagePack specification (msgpack.org, spec.md). What must be refused is
 * in test_proto_msg_refusals.c; the samples both use in
 * support/proto_msg_fixture.c. */
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
    for (size_t t = 0; t < fx_n_types; t++) {
        proto_msg_t m = fx_sample(fx_all_types[t]);
        proto_msg_t *d = fx_round_trip(&m);
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
    double fit[4] = {-0.0, 4.9406564584124654e-324, fx_from_bits(0x7ff8000000000123ull),
                     fx_from_bits(0xfff0000000000001ull) /* signalling NaN, sign set */};
    proto_result_t r = {.tag = UINT64_MAX, .status = PROTO_STATUS_FAILED, .cached = 1,
                        .seed = UINT64_MAX, .n_fitness = 4, .fitness = fit, .error = "",
                        .worker = "", .host = ""};
    memset(r.key, 0xff, sizeof r.key);
    proto_msg_t m = {.type = PROTO_RESULTS};
    m.u.results = (proto_results_t){.run_id = "", .n_results = 1, .results = &r};
    proto_msg_t *d = fx_round_trip(&m);
    const proto_result_t *g = &d->u.results.results[0];
    assert_int_equal(g->tag, UINT64_MAX);
    assert_int_equal(g->seed, UINT64_MAX);
    assert_int_equal(g->cached, 1);
    assert_int_equal(g->n_fitness, 4);
    for (int i = 0; i < 4; i++)
        assert_int_equal(fx_bits(g->fitness[i]), fx_bits(fit[i]));
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
        d = fx_round_trip(&empties[i]);
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
    d = fx_round_trip(&jm);
    assert_int_equal(d->u.jobs.jobs[0].genome_len, PROTO_MAX_GENOME_BYTES);
    assert_memory_equal(d->u.jobs.jobs[0].genome, big, PROTO_MAX_GENOME_BYTES);
    proto_msg_destroy(&d);
    free(big);
}

/* The decoded fields of a sample equal what was encoded (fx_round_trip checks
 * bytes; this checks the struct a caller reads). */
static void test_decoded_fields(void **state)
{
    (void)state;
    proto_msg_t m = fx_sample(PROTO_SUBMIT);
    proto_msg_t *d = fx_round_trip(&m);
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
    assert_memory_equal(s->items[1].genome, fx_genome_a, FX_GENOME_A_LEN);
    proto_msg_destroy(&d);

    m = fx_sample(PROTO_STATUS);
    d = fx_round_trip(&m);
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
    assert_true(d->u.status.workers[0].medians[0] == 0.0);
    assert_true(d->u.status.workers[0].medians[1] == 0.4625);
    assert_int_equal(d->u.status.workers[1].n_plugins, 0);
    assert_string_equal(d->u.status.workers[1].state, "paused: outside --hours 08:00-18:00");
    proto_msg_destroy(&d);

    m = fx_sample(PROTO_HAND_BACK);
    d = fx_round_trip(&m);
    assert_string_equal(d->u.hand_back.reason, "load 3.10 above --max-load 2");
    assert_int_equal(d->u.hand_back.n_jobs, FX_N_TAGS);
    for (uint32_t i = 0; i < d->u.hand_back.n_jobs; i++)
        assert_int_equal(d->u.hand_back.job_ids[i], fx_tags[i]);
    assert_int_equal(d->u.hand_back.draining, 1);
    proto_msg_destroy(&d);

    m = fx_sample(PROTO_CANCEL);
    d = fx_round_trip(&m);
    assert_int_equal(d->u.cancel.n_jobs, FX_N_TAGS);
    for (uint32_t i = 0; i < d->u.cancel.n_jobs; i++)
        assert_int_equal(d->u.cancel.job_ids[i], fx_tags[i]);
    proto_msg_destroy(&d);

    m = fx_sample(PROTO_HELLO);
    d = fx_round_trip(&m);
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
    uint8_t *got = fx_encode(m, &len);
    assert_int_equal(len, want_len);
    assert_memory_equal(got, want, len);
    free(got);
}

static void test_golden_heartbeat_and_credit(void **state)
{
    (void)state;
    static const uint8_t heartbeat[] = {
        0x92, /* fixarray (1001xxxx) with 2 elements */
        0x02, /* positive fixint (0xxxxxxx): version 2 */
        0x28, /* positive fixint: type 40 = HEARTBEAT */
    };
    proto_msg_t hb = {.type = PROTO_HEARTBEAT};
    s_expect_bytes(&hb, heartbeat, sizeof heartbeat);

    static const uint8_t credit[] = {
        0x93,             /* fixarray, 3 elements */
        0x02,             /* positive fixint: version 2 */
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

    static const uint8_t cancel[] = {
        0x93,             /* fixarray, 3 elements: version, type, job_ids */
        0x02,             /* positive fixint: version 2 */
        0x20,             /* positive fixint: type 32 = CANCEL */
        0x92,             /* fixarray, 2 job ids */
        0x05,             /* positive fixint: 5 */
        0xcd, 0x01, 0x00, /* uint 16: 256 */
    };
    uint64_t ids[] = {5, 256};
    proto_msg_t cn = {.type = PROTO_CANCEL};
    cn.u.cancel = (proto_cancel_t){.n_jobs = 2, .job_ids = ids};
    s_expect_bytes(&cn, cancel, sizeof cancel);
}

static void test_golden_done(void **state)
{
    (void)state;
    static const uint8_t done[] = {
        0x94,       /* fixarray, 4 elements: version, type, credits, outcomes */
        0x02,       /* positive fixint: version 2 */
        0x16,       /* positive fixint: type 22 = DONE */
        0x02,       /* positive fixint: credits 2 */
        0x91,       /* fixarray, 1 outcome */
        0x97,       /* fixarray, 7 fields of the outcome */
        0x07,       /* positive fixint: job_id 7 */
        0x00,       /* positive fixint: status 0 = ok */
        0x91,       /* fixarray, 1 fitness value */
        0xcb, 0x3f, 0xe0, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, /* float 64, big-endian: 0.5 */
        0xcb, 0x3f, 0xf8, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, /* float 64: cpu_seconds 1.5 */
        0xcc, 0xc8, /* uint 8 (0xcc) + 1 byte: peak_rss_kb 200 (> 127, so not fixint) */
        0xa2, 'o', 'k', /* fixstr (101xxxxx) of 2 bytes: error "ok" */
        0xcb, 0x40, 0x04, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, /* float 64: wall_seconds 2.5 */
    };
    double fit = 0.5;
    proto_outcome_t o = {.job_id = 7, .status = 0, .n_fitness = 1, .fitness = &fit,
                         .cpu_seconds = 1.5, .peak_rss_kb = 200, .error = "ok",
                         .wall_seconds = 2.5};
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
    want[n++] = 0x02; /* version 2 */
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
        cmocka_unit_test(test_destroy_hand_built),
        cmocka_unit_test(test_names),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
