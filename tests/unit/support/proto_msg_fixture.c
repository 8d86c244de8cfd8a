/* proto_msg_fixture.c: what the wire-message tests share (see the header):
 * sample messages of every type on static data, and the round-trip and
 * refusal checks. */
#include "proto_msg_fixture.h"

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

uint64_t fx_bits(double d)
{
    uint64_t u;
    memcpy(&u, &d, sizeof u);
    return u;
}

double fx_from_bits(uint64_t u)
{
    double d;
    memcpy(&d, &u, sizeof d);
    return d;
}

/* Encodes m, decodes it, re-encodes the result and checks the two encodings
 * are the same bytes: every field the encoder writes survived decoding.
 * Returns the decoded message (caller destroys it). */
proto_msg_t *fx_round_trip(const proto_msg_t *m)
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
void fx_expect_refused(const uint8_t *buf, size_t len, const proto_limits_t *lim, int code,
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
uint8_t *fx_encode(const proto_msg_t *m, size_t *len)
{
    uint8_t *buf = NULL;
    assert_int_equal(proto_msg_encode(m, &buf, len), PROTO_OK);
    return buf;
}

/* Sample messages of every type, on the stack; pointers to static data. */
uint8_t fx_genome_a[FX_GENOME_A_LEN] = {0x00, 0x01, 0xfe, 0xff, 0x00};
static double s_fit[] = {0.0, -0.0, 1.5, 4.9406564584124654e-324 /* smallest subnormal */,
                         1.7976931348623157e308};
static proto_item_t s_items[] = {
    {.tag = 0, .replicate = 0, .genome_len = 0, .genome = NULL},
    {.tag = UINT64_MAX, .replicate = PROTO_MAX_REPLICATES - 1, .genome_len = sizeof fx_genome_a,
     .genome = fx_genome_a},
    {.tag = 128, .replicate = 7, .genome_len = 3, .genome = fx_genome_a},
};
uint64_t fx_tags[FX_N_TAGS] = {0, 1, 127, 128, 255, 256, 65535, 65536, UINT32_MAX,
                            (uint64_t)UINT32_MAX + 1, UINT64_MAX};
static char *s_plugins_a[] = {"zdt1@1.0", "granular@2.3"};
static double s_medians_a[] = {0.0 /* not measured */, 0.4625};
static char *s_warnings[] = {"two builds of zdt1@1.0 in the pool", ""};
static char *s_seed_params[] = {"scatter_radius", "jitter"};

proto_msg_t fx_sample(uint32_t type)
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
        m.u.ack = (proto_ack_t){.run_id = "", .n_tags = sizeof fx_tags / sizeof fx_tags[0],
                                .tags = fx_tags};
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
                                           .medians = s_medians_a,
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
                                            .n_jobs = sizeof fx_tags / sizeof fx_tags[0],
                                            .job_ids = fx_tags, .draining = 1};
        break;
    case PROTO_CANCEL:
        m.u.cancel = (proto_cancel_t){.n_jobs = sizeof fx_tags / sizeof fx_tags[0],
                                      .job_ids = fx_tags};
        break;
    case PROTO_CREDIT:
        m.u.credit.credits = 256;
        break;
    case PROTO_DONE:
        outcomes[0] = (proto_outcome_t){.job_id = 1, .status = PROTO_STATUS_OK, .n_fitness = 5,
                                        .fitness = s_fit, .cpu_seconds = -0.0,
                                        .peak_rss_kb = UINT64_MAX, .error = "",
                                        .wall_seconds = 3600.5};
        outcomes[1] = (proto_outcome_t){.job_id = UINT64_MAX, .status = PROTO_STATUS_CRASHED,
                                        .n_fitness = 0, .fitness = NULL, .cpu_seconds = 0.25,
                                        .peak_rss_kb = 0, .error = "signal 11"};
        m.u.done = (proto_done_t){.credits = 0, .n_outcomes = 2, .outcomes = outcomes};
        break;
    case PROTO_JOBS:
        jobs[0] = (proto_job_t){.job_id = 42, .plugin = "zdt1", .params = "{}", .seed = 1,
                                .timeout_ms = 0, .genome_len = sizeof fx_genome_a,
                                .genome = fx_genome_a};
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

const uint32_t fx_all_types[] = {
    PROTO_SUBMIT, PROTO_ACK,    PROTO_STATUS_REQ, PROTO_ACCEPTED, PROTO_RESULTS,
    PROTO_REFUSED, PROTO_STATUS, PROTO_HELLO,     PROTO_CREDIT,   PROTO_DONE,
    PROTO_BYE,    PROTO_JOBS,   PROTO_REHELLO,    PROTO_HEARTBEAT, PROTO_HAND_BACK,
    PROTO_CANCEL,
};
const size_t fx_n_types = sizeof fx_all_types / sizeof fx_all_types[0];
