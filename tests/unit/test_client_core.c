/* test_client_core.c: the client library's core (client/lib/run.c, core.c,
 * batch.c) with no socket at all: messages are fed in as decoded structs and
 * what the core emits is read from its outbox and decoded. Checks tags,
 * chunking, the little-endian genome encoding, exactly-once delivery with an
 * ACK for every copy, structured refusals, re-sends after a reconnect and
 * their retry schedule, and runs outliving their client.
 *
 * Outside reference: genomes go on the wire as IEEE 754-2008 binary64 in
 * little-endian byte order; the expected bytes of 1.0 (0x3ff0000000000000)
 * and -2.5 (0xc004000000000000) are the standard's encodings, written here
 * by hand. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdlib.h>
#include <string.h>

#include "client/lib/run.h"

/* Decodes and removes the oldest message in the outbox (caller destroys). */
static proto_msg_t *s_take(client_core_t *core)
{
    const client_frame_t *f = client_core_peek_frame(core);
    if (!f)
        return NULL;
    proto_msg_t *msg = NULL;
    assert_int_equal(proto_msg_decode(f->buf, f->len, NULL, &msg, NULL), PROTO_OK);
    client_core_drop_frame(core);
    return msg;
}

static fitfarm_run_t *s_open(client_core_t *core, const char *id)
{
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = id;
    ro.seed = 9;
    fitfarm_run_t *run = NULL;
    assert_int_equal(client_run_new(core, NULL, &ro, &run), FITFARM_OK);
    return run;
}

static fitfarm_batch_t *s_batch(size_t n, unsigned replicates)
{
    fitfarm_batch_t *b = NULL;
    assert_int_equal(fitfarm_batch_new("sphere", NULL, replicates, &b), FITFARM_OK);
    for (size_t i = 0; i < n; i++) {
        double g[2] = {1.0, -2.5 + (double)i};
        assert_int_equal(fitfarm_batch_add_f64(b, g, 2), (long)i);
    }
    return b;
}

static void s_feed_accepted(client_core_t *core, uint64_t batch_tag)
{
    proto_msg_t m = {.type = PROTO_ACCEPTED};
    m.u.accepted = (proto_accepted_t){.run_id = "r", .batch_tag = batch_tag, .n_accepted = 1};
    assert_int_equal(client_runs_on_message(core, &m), 1);
}

static void s_feed_results(client_core_t *core, const char *run_id, const uint64_t *tags,
                           size_t n)
{
    proto_result_t r[8];
    double fit[8];
    memset(r, 0, sizeof r);
    for (size_t i = 0; i < n; i++) {
        fit[i] = (double)tags[i] + 0.5;
        r[i] = (proto_result_t){.tag = tags[i], .status = PROTO_STATUS_OK, .seed = 1000 + tags[i],
                                .n_fitness = 1, .fitness = &fit[i], .error = "",
                                .worker = "w1", .host = "lab-3", .cpu_seconds = 0.5};
    }
    proto_msg_t m = {.type = PROTO_RESULTS};
    m.u.results = (proto_results_t){.run_id = (char *)run_id, .n_results = (uint32_t)n,
                                    .results = r};
    assert_int_equal(client_runs_on_message(core, &m), 1);
}

/* The usage example: submit, accept, results in any order, each once. */
static void test_usage_example(void **state)
{
    (void)state;
    client_core_t core;
    client_core_init(&core);
    fitfarm_run_t *run = s_open(&core, "r");
    fitfarm_batch_t *b = s_batch(3, 2);
    assert_int_equal(client_run_submit_start(run, b, 1, 0), FITFARM_OK);

    proto_msg_t *sub = s_take(&core);
    assert_non_null(sub);
    assert_null(client_core_peek_frame(&core)); /* one chunk */
    assert_int_equal(sub->type, PROTO_SUBMIT);
    assert_string_equal(sub->u.submit.run_id, "r");
    assert_int_equal(sub->u.submit.run_seed, 9);
    assert_int_equal(sub->u.submit.n_items, 6);
    for (uint32_t k = 0; k < 6; k++) {
        assert_int_equal(sub->u.submit.items[k].tag, k); /* deterministic: from 0 */
        assert_int_equal(sub->u.submit.items[k].replicate, k % 2);
        assert_int_equal(sub->u.submit.items[k].genome_len, 16);
    }
    static const uint8_t one[8] = {0, 0, 0, 0, 0, 0, 0xf0, 0x3f};       /* 1.0 */
    static const uint8_t minus[8] = {0, 0, 0, 0, 0, 0, 0x04, 0xc0};     /* -2.5 */
    assert_memory_equal(sub->u.submit.items[0].genome, one, 8);
    assert_memory_equal(sub->u.submit.items[0].genome + 8, minus, 8);
    uint64_t batch_tag = sub->u.submit.batch_tag;
    proto_msg_destroy(&sub);

    assert_int_equal(client_run_submit_pending(run, b), 1);
    s_feed_accepted(&core, batch_tag);
    assert_int_equal(client_run_submit_pending(run, b), 0);
    assert_int_equal(client_run_submit_finish(run, b, FITFARM_OK), FITFARM_OK);

    uint64_t first[2] = {5, 0};
    s_feed_results(&core, "r", first, 2);
    proto_msg_t *ack = s_take(&core);
    assert_int_equal(ack->type, PROTO_ACK);
    assert_int_equal(ack->u.ack.n_tags, 2);
    assert_int_equal(ack->u.ack.tags[0], 5);
    assert_int_equal(ack->u.ack.tags[1], 0);
    proto_msg_destroy(&ack);
    assert_int_equal(fitfarm_batch_arrived(b), 2);

    /* Streamed in arrival order; tag 5 is genome 2, replicate 1. */
    fitfarm_result_t res = FITFARM_RESULT_INIT;
    assert_int_equal(client_run_next_ready(run, &res), 1);
    assert_int_equal(res.index, 2);
    assert_int_equal(res.replicate, 1);
    assert_int_equal(res.seed, 1005);
    assert_true(res.fitness[0] == 5.5);
    assert_string_equal(res.worker, "w1");
    assert_string_equal(res.host, "lab-3");
    assert_int_equal(client_run_next_ready(run, &res), 1);
    assert_int_equal(res.index, 0);
    assert_int_equal(client_run_next_ready(run, &res), 0);

    /* A copy sent again (our ACK was lost) is dropped but acknowledged again. */
    uint64_t again[1] = {5};
    s_feed_results(&core, "r", again, 1);
    ack = s_take(&core);
    assert_int_equal(ack->u.ack.n_tags, 1);
    proto_msg_destroy(&ack);
    assert_int_equal(client_run_next_ready(run, &res), 0);
    fitfarm_run_stats_t st = FITFARM_RUN_STATS_INIT;
    assert_int_equal(fitfarm_run_stats(run, &st), 0);
    assert_int_equal(st.submitted, 6);
    assert_int_equal(st.accepted, 6);
    assert_int_equal(st.delivered, 2);
    assert_int_equal(st.duplicates, 1);

    /* Results for another run, or for tags no batch holds, are not ours. */
    uint64_t stray[1] = {99};
    s_feed_results(&core, "r", stray, 1);
    s_feed_results(&core, "someone-else", first, 2);
    assert_null(client_core_peek_frame(&core));
    assert_int_equal(fitfarm_batch_arrived(b), 2);

    fitfarm_batch_destroy(&b);
    fitfarm_run_destroy(&run);
    assert_null(core.runs);
    client_core_fini(&core);
}

/* A refusal names one request by tag; the core turns it into the caller's
 * genome index and replicate, with no text parsed. */
static void test_structured_refusal(void **state)
{
    (void)state;
    client_core_t core;
    client_core_init(&core);
    fitfarm_run_t *run = s_open(&core, "r");
    fitfarm_batch_t *b = s_batch(4, 1);
    assert_int_equal(client_run_submit_start(run, b, 0, 0), FITFARM_OK);
    proto_msg_t *sub = s_take(&core);
    proto_msg_t m = {.type = PROTO_REFUSED};
    m.u.refused = (proto_refused_t){.code = PROTO_REFUSE_NOT_RECORDED,
                                    .batch_tag = sub->u.submit.batch_tag,
                                    .run_id = "r",
                                    .text = "no such request",
                                    .has_tag = 1,
                                    .tag = 2};
    proto_msg_destroy(&sub);
    assert_int_equal(client_runs_on_message(&core, &m), 1);
    assert_int_equal(client_run_submit_finish(run, b, FITFARM_OK), FITFARM_ENOTRECORDED);
    assert_non_null(strstr(core.err, "genome 2, replicate 0"));
    fitfarm_refusal_t ref = FITFARM_REFUSAL_INIT;
    assert_int_equal(fitfarm_refusal(run, &ref), 0);
    assert_int_equal(ref.code, FITFARM_ENOTRECORDED);
    assert_int_equal(ref.has_request, 1);
    assert_ptr_equal(ref.batch, b);
    assert_int_equal(ref.index, 2);
    assert_string_equal(ref.text, "no such request");
    fitfarm_batch_destroy(&b);
    assert_int_equal(fitfarm_refusal(run, &ref), 0);
    assert_null(ref.batch); /* the batch left: no dangling pointer */
    fitfarm_run_destroy(&run);
    client_core_fini(&core);
}

/* After a reconnect every accepted, unanswered request is sent again in a
 * background chunk; a restarted broker that is not ready yet (queue full)
 * schedules another try a second later, and a later acceptance ends it. */
static void test_resend_after_reconnect(void **state)
{
    (void)state;
    client_core_t core;
    client_core_init(&core);
    fitfarm_run_t *run = s_open(&core, "r");
    fitfarm_batch_t *b = s_batch(3, 1);
    assert_int_equal(client_run_submit_start(run, b, 1, 0), FITFARM_OK);
    proto_msg_t *sub = s_take(&core);
    s_feed_accepted(&core, sub->u.submit.batch_tag);
    proto_msg_destroy(&sub);
    assert_int_equal(client_run_submit_finish(run, b, FITFARM_OK), FITFARM_OK);
    uint64_t got[1] = {1};
    s_feed_results(&core, "r", got, 1);
    proto_msg_t *ack = s_take(&core);
    proto_msg_destroy(&ack);
    assert_int_equal(client_runs_next_retry(&core), -1);

    client_runs_resend_due(&core, 1000, 1);
    sub = s_take(&core);
    assert_non_null(sub);
    assert_int_equal(sub->type, PROTO_SUBMIT);
    assert_int_equal(sub->u.submit.n_items, 2); /* tags 0 and 2; 1 arrived */
    assert_int_equal(sub->u.submit.items[0].tag, 0);
    assert_int_equal(sub->u.submit.items[1].tag, 2);
    proto_msg_t m = {.type = PROTO_REFUSED};
    m.u.refused = (proto_refused_t){.code = PROTO_REFUSE_QUEUE_FULL,
                                    .batch_tag = sub->u.submit.batch_tag,
                                    .run_id = "r",
                                    .text = "busy"};
    proto_msg_destroy(&sub);
    assert_int_equal(client_runs_on_message(&core, &m), 1);
    assert_true(client_runs_next_retry(&core) > 0);
    assert_int_equal(client_run_take_async(run), 0); /* transient: not an error yet */

    client_runs_resend_due(&core, client_runs_next_retry(&core), 0);
    sub = s_take(&core);
    assert_int_equal(sub->u.submit.n_items, 2);
    s_feed_accepted(&core, sub->u.submit.batch_tag);
    proto_msg_destroy(&sub);
    assert_int_equal(client_runs_next_retry(&core), -1);
    fitfarm_run_stats_t st = FITFARM_RUN_STATS_INIT;
    assert_int_equal(fitfarm_run_stats(run, &st), 0);
    assert_int_equal(st.resent, 4);
    fitfarm_batch_destroy(&b);
    fitfarm_run_destroy(&run);
    client_core_fini(&core);
}

/* A run that outlives its client fails cleanly instead of touching freed
 * state; destroying it afterwards is safe. */
static void test_run_outlives_client(void **state)
{
    (void)state;
    client_core_t core;
    client_core_init(&core);
    fitfarm_run_t *run = s_open(&core, "r");
    fitfarm_run_t *dup = NULL;
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = "r";
    assert_int_equal(client_run_new(&core, NULL, &ro, &dup), FITFARM_EINVAL);
    assert_non_null(strstr(core.err, "already open"));
    client_runs_detach(&core);
    client_core_fini(&core);
    fitfarm_batch_t *b = s_batch(1, 1);
    assert_int_equal(client_run_submit_start(run, b, 0, 0), FITFARM_EINVAL);
    fitfarm_batch_destroy(&b);
    fitfarm_run_destroy(&run);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_structured_refusal),
        cmocka_unit_test(test_resend_after_reconnect),
        cmocka_unit_test(test_run_outlives_client),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
