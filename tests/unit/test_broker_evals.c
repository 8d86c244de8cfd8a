/* test_broker_evals.c: the broker's job lifecycle without sockets: single
 * flight (one evaluation for many requests, also across runs), cache hits,
 * retry accounting for crashed and timed-out jobs, re-queueing a dropped
 * worker's jobs and accepting its late result exactly once, and round-robin
 * fairness between a large and a small run. The broker state is driven
 * through the same functions the loop calls, with the sockets left NULL. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "broker/client_io.h"
#include "broker/core.h"
#include "broker/dispatch.h"
#include "broker/quota.h"
#include "broker/worker_io.h"

static broker_t *s_broker(unsigned attempts)
{
    broker_t *b = calloc(1, sizeof *b);
    broker_core_init(b, 5000, 1000, attempts, NULL);
    broker_worker_timers_start(b);
    return b;
}

static void s_broker_destroy(broker_t **b)
{
    broker_core_fini(*b);
    free(*b);
    *b = NULL;
}

static broker_worker_t *s_worker(broker_t *b, const char *rid, const char *plugin, int deterministic,
                                 uint32_t credits)
{
    proto_plugin_info_t pi = {.name = (char *)plugin,
                              .version = (char *)"1.0",
                              .objectives = 2,
                              .flags = deterministic ? PROTO_PLUGIN_DETERMINISTIC : 0};
    proto_hello_t h = {.name = (char *)rid,
                       .host = (char *)"localhost",
                       .arch = (char *)"x86_64",
                       .slots = 4,
                       .n_plugins = 1,
                       .plugins = &pi};
    broker_worker_t *w = broker_worker_on_hello(b, (const uint8_t *)rid, strlen(rid), &h);
    broker_registry_add_credits(&b->registry, w, credits);
    return w;
}

static const char *s_who = "local"; /* the sender's identity (access.h) */

/* Submits n items; item i carries genome value genomes[i] (one f64) and tag
 * tag0 + i. Returns the refusal code or 0. */
static int s_submit(broker_t *b, const char *client, const char *run_id, uint64_t seed,
                    const char *plugin, const double *genomes, uint32_t n, uint64_t tag0,
                    uint32_t flags)
{
    proto_item_t *items = calloc(n ? n : 1, sizeof *items);
    for (uint32_t i = 0; i < n; i++) {
        items[i].tag = tag0 + i;
        items[i].replicate = 0;
        items[i].genome_len = sizeof(double);
        items[i].genome = (uint8_t *)&genomes[i];
    }
    proto_submit_t s = {.run_id = (char *)run_id,
                        .run_seed = seed,
                        .seed_mode = PROTO_SEED_GENOME,
                        .flags = flags,
                        .batch_tag = 1,
                        .plugin = (char *)plugin,
                        .params = (char *)"{}",
                        .n_items = n,
                        .items = items};
    int rc = broker_client_submit(b, (const uint8_t *)client, strlen(client), s_who, &s);
    free(items);
    return rc;
}

static proto_outcome_t s_outcome(uint64_t job_id, uint32_t status, double f)
{
    static double fit[2];
    fit[0] = f;
    fit[1] = -f;
    proto_outcome_t o = {.job_id = job_id,
                         .status = status,
                         .n_fitness = status == PROTO_STATUS_OK ? 2 : 0,
                         .fitness = fit,
                         .error = (char *)(status == PROTO_STATUS_OK ? "" : "child died")};
    return o;
}

/* Usage example: one worker, one run, one genome evaluated once for three
 * requests; a fourth request later is a cache hit. */
static void test_usage_example(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    broker_worker_t *w = s_worker(b, "w1", "spin", 0, 8);
    double g[3] = {0.5, 0.5, 0.5};
    assert_int_equal(s_submit(b, "c1", "run-a", 42, "spin", g, 3, 100, 0), 0);
    broker_run_t *run = broker_runs_get(&b->runs, "run-a");
    assert_non_null(run);
    assert_int_equal(run->n_queued, 1); /* three requests, one evaluation */
    assert_int_equal(run->outstanding, 3);
    assert_int_equal(broker_dispatch_turn(b), 1);
    assert_int_equal(w->held, 1);
    assert_int_equal(w->credits, 7);
    proto_outcome_t o = s_outcome(w->jobs_head->live->job_id, PROTO_STATUS_OK, 1.25);
    broker_dispatch_outcome(b, w, &o);
    assert_int_equal(w->held, 0);
    assert_int_equal(run->n_outbox, 3);
    for (uint32_t i = 0; i < 3; i++) {
        assert_int_equal(run->outbox[i].cached, 0);
        assert_int_equal(run->outbox[i].status, PROTO_STATUS_OK);
        assert_true(run->outbox[i].fitness[0] == 1.25);
    }
    assert_int_equal(run->outstanding, 0);
    broker_client_flush(b); /* no sockets: moves the outbox to unacked */
    assert_int_equal(broker_table_size(run->unacked), 3);
    assert_int_equal(broker_runs_ack(&b->runs, run, 101), 1);
    assert_int_equal(broker_runs_ack(&b->runs, run, 101), 0);
    assert_int_equal(s_submit(b, "c1", "run-a", 42, "spin", g, 1, 200, 0), 0);
    assert_int_equal(run->n_outbox, 1);
    assert_int_equal(run->outbox[0].cached, 1);
    assert_int_equal(run->n_queued, 0);
    s_broker_destroy(&b);
}

static void test_single_flight_across_runs_and_no_cache(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    broker_worker_t *w = s_worker(b, "w1", "det", 1, 8);
    double g[1] = {2.0};
    /* a deterministic plugin's key omits the seed: two runs share one evaluation */
    assert_int_equal(s_submit(b, "c1", "r1", 1, "det", g, 1, 1, 0), 0);
    assert_int_equal(s_submit(b, "c2", "r2", 2, "det", g, 1, 1, 0), 0);
    assert_int_equal(broker_table_size(b->evals.by_key), 1);
    assert_int_equal(broker_dispatch_turn(b), 1);
    /* a third request while it runs attaches too */
    assert_int_equal(s_submit(b, "c2", "r2", 2, "det", g, 1, 2, 0), 0);
    assert_int_equal(broker_dispatch_turn(b), 0);
    proto_outcome_t o = s_outcome(w->jobs_head->live->job_id, PROTO_STATUS_OK, 3.0);
    broker_dispatch_outcome(b, w, &o);
    broker_run_t *r1 = broker_runs_get(&b->runs, "r1"), *r2 = broker_runs_get(&b->runs, "r2");
    assert_int_equal(r1->n_outbox, 1);
    assert_int_equal(r2->n_outbox, 2);
    assert_int_equal(r2->outbox[1].cached, 0); /* attached while running: not a cache hit */
    /* The finished evaluation keeps no genome, nor any other part it needed
     * only until answered: it answers by key. */
    size_t cur = 0;
    broker_eval_t *done = broker_table_next(b->evals.by_key, &cur);
    assert_non_null(done);
    assert_int_equal(done->state, BROKER_EVAL_DONE);
    assert_null(done->live);
    assert_true(broker_eval_check(&b->evals, done));
    /* no-cache evaluates the same key again, with the request's genome */
    assert_int_equal(s_submit(b, "c1", "r1", 1, "det", g, 1, 9, PROTO_SUBMIT_NO_CACHE), 0);
    assert_int_equal(r1->n_queued, 1);
    assert_int_equal(broker_dispatch_turn(b), 1);
    broker_eval_t *again = w->jobs_head;
    assert_true(again->fresh && again->live->origin == done);
    assert_int_equal(again->live->genome_len, sizeof(double));
    double sent;
    memcpy(&sent, again->live->genome, sizeof sent);
    assert_true(sent == 2.0);
    assert_true(broker_eval_check(&b->evals, again));
    /* While it runs the cached one has a live part again, pinned by it and
     * out of the LRU list; its result settles both: the fresh one is freed
     * and the cached one is a bare cached result once more, still 3.0. */
    assert_non_null(done->live);
    assert_ptr_equal(broker_eval_again(done), again);
    assert_false(done->in_lru);
    o = s_outcome(again->live->job_id, PROTO_STATUS_OK, 4.0);
    broker_dispatch_outcome(b, w, &o);
    assert_null(done->live);
    assert_true(done->in_lru);
    assert_true(broker_eval_fitness(done)[0] == 3.0);
    assert_true(broker_eval_check(&b->evals, done));
    assert_int_equal(r1->outbox[r1->n_outbox - 1].status, PROTO_STATUS_OK);
    assert_true(r1->outbox[r1->n_outbox - 1].fitness[0] == 4.0);
    s_broker_destroy(&b);
}

/* A cached result's provenance, its one objective inline and a time-out's
 * limit outlive the live part; two objectives go to the heap. */
static void test_settled_result_keeps_what_it_answers_with(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    broker_worker_t *w = s_worker(b, "w1", "spin", 0, 8);
    double g[1] = {9.0};
    assert_int_equal(s_submit(b, "c1", "r", 5, "spin", g, 1, 1, 0), 0);
    assert_int_equal(broker_dispatch_turn(b), 1);
    broker_eval_t *e = w->jobs_head;
    proto_outcome_t o = s_outcome(e->live->job_id, PROTO_STATUS_OK, 0);
    double two[2] = {0.25, -8.5};
    o.fitness = two;
    o.n_fitness = 2;
    o.cpu_seconds = 1.5;
    o.peak_rss_kb = 1ull << 40; /* past 32 bits: saturates */
    broker_dispatch_outcome(b, w, &o);
    assert_null(e->live);
    assert_int_equal(e->n_fitness, 2);
    assert_true(broker_eval_fitness(e)[0] == 0.25 && broker_eval_fitness(e)[1] == -8.5);
    broker_provenance_t p = broker_eval_provenance(e);
    assert_string_equal(p.worker, "w1");
    assert_true(p.cpu_seconds == 1.5);
    assert_int_equal(p.peak_rss_kb, UINT32_MAX);
    assert_true(p.finished_at > 0);
    assert_true(broker_eval_check(&b->evals, e));
    s_broker_destroy(&b);
}

static void test_retry_accounting(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    broker_worker_t *wa = s_worker(b, "wa", "spin", 0, 8);
    broker_worker_t *wb = s_worker(b, "wb", "spin", 0, 8);
    double g[1] = {7.0};
    assert_int_equal(s_submit(b, "c1", "r", 5, "spin", g, 1, 1, 0), 0);
    broker_run_t *run = broker_runs_get(&b->runs, "r");
    broker_eval_t *e = run->queues[0].head;
    uint64_t seed = e->seed;

    assert_int_equal(broker_dispatch_turn(b), 1);
    assert_ptr_equal(e->live->worker, wa);
    proto_outcome_t o = s_outcome(e->live->job_id, PROTO_STATUS_CRASHED, 0);
    broker_dispatch_outcome(b, wa, &o);
    assert_int_equal(e->live->attempts, 1);
    assert_int_equal(e->state, BROKER_EVAL_QUEUED);

    /* a retry goes to another worker when one carries the plugin */
    assert_int_equal(broker_dispatch_turn(b), 1);
    assert_ptr_equal(e->live->worker, wb);
    assert_int_equal(e->seed, seed); /* same seed on every attempt */
    o = s_outcome(e->live->job_id, PROTO_STATUS_TIMEOUT, 0);
    broker_dispatch_outcome(b, wb, &o);
    assert_int_equal(e->live->attempts, 2);

    assert_int_equal(broker_dispatch_turn(b), 1);
    assert_ptr_equal(e->live->worker, wa);
    o = s_outcome(e->live->job_id, PROTO_STATUS_CRASHED, 0);
    broker_dispatch_outcome(b, wa, &o);
    /* third attempt of three: final, with the last status and error */
    assert_int_equal(e->state, BROKER_EVAL_DONE);
    assert_int_equal(e->status, PROTO_STATUS_CRASHED);
    assert_string_equal(e->error, "child died");
    assert_int_equal(run->n_outbox, 1);
    assert_int_equal(run->n_running + run->n_queued, 0);
    assert_int_equal(wa->held + wb->held, 0);
    assert_int_equal(wa->credits + wb->credits, 16 - 3);
    s_broker_destroy(&b);
}

static void test_dropped_worker_requeue_and_late_result(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    broker_worker_t *wa = s_worker(b, "wa", "spin", 0, 8);
    double g[2] = {1.0, 2.0};
    assert_int_equal(s_submit(b, "c1", "r", 5, "spin", g, 2, 1, 0), 0);
    assert_int_equal(broker_dispatch_turn(b), 2);
    broker_eval_t *first = wa->jobs_head, *second = wa->jobs_tail;
    uint64_t old_job = first->live->job_id;
    assert_int_equal(broker_dispatch_drop_worker(b, wa), 2);
    broker_run_t *run = broker_runs_get(&b->runs, "r");
    assert_int_equal(run->n_queued, 2);
    assert_ptr_equal(run->queues[0].head, first); /* order kept at the front */
    assert_ptr_equal(run->queues[0].head->next, second);

    broker_worker_t *wb = s_worker(b, "wb", "spin", 0, 8);
    assert_int_equal(broker_dispatch_turn(b), 2);
    assert_ptr_equal(first->live->worker, wb);
    uint64_t new_job = first->live->job_id;
    assert_true(new_job != old_job);
    /* the dropped worker's late result arrives first: accepted once */
    proto_outcome_t o = s_outcome(old_job, PROTO_STATUS_OK, 4.0);
    broker_dispatch_outcome(b, NULL, &o);
    assert_int_equal(first->state, BROKER_EVAL_DONE);
    assert_int_equal(wb->held, 1);
    assert_int_equal(run->n_outbox, 1);
    /* the re-dispatched copy's result is ignored: never delivered twice */
    o = s_outcome(new_job, PROTO_STATUS_OK, 5.0);
    broker_dispatch_outcome(b, wb, &o);
    assert_int_equal(run->n_outbox, 1);
    assert_true(broker_eval_fitness(first)[0] == 4.0);
    /* and the stale id again: still nothing */
    o = s_outcome(old_job, PROTO_STATUS_OK, 6.0);
    broker_dispatch_outcome(b, NULL, &o);
    assert_int_equal(run->n_outbox, 1);
    s_broker_destroy(&b);
}

static void test_round_robin_fairness(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    enum { BIG = 1000, SMALL = 10 };
    static double big[BIG], small[SMALL];
    for (int i = 0; i < BIG; i++)
        big[i] = i;
    for (int i = 0; i < SMALL; i++)
        small[i] = 10000 + i;
    assert_int_equal(s_submit(b, "c1", "big", 1, "spin", big, BIG, 0, 0),
                     PROTO_REFUSE_UNKNOWN_PLUGIN); /* no worker has said HELLO yet */
    broker_worker_t *w = s_worker(b, "w", "spin", 0, 0);
    assert_int_equal(s_submit(b, "c1", "big", 1, "spin", big, BIG, 0, 0), 0);
    assert_int_equal(s_submit(b, "c2", "small", 2, "spin", small, SMALL, 0, 0), 0);
    broker_registry_add_credits(&b->registry, w, 2 * SMALL);
    assert_int_equal(broker_dispatch_turn(b), 2 * SMALL);
    broker_run_t *rb = broker_runs_get(&b->runs, "big"), *rs = broker_runs_get(&b->runs, "small");
    /* the small run, submitted after 1000 big jobs, is served in full
     * within the first 2*SMALL dispatches, alternating with the big one */
    assert_int_equal(rs->n_running, SMALL);
    assert_int_equal(rb->n_running, SMALL);
    assert_int_equal(rs->n_queued, 0);
    int k = 0, big_seen = 0;
    for (broker_eval_t *e = w->jobs_head; e; e = e->next, k++) {
        assert_ptr_equal(e->live->home, k % 2 == 0 ? rb : rs);
        if (e->live->home == rb) {
            double v;
            memcpy(&v, e->live->genome, sizeof v);
            assert_true(v == big_seen++); /* oldest first within a run */
        }
    }
    assert_true(broker_runs_check(&b->runs));
    s_broker_destroy(&b);
}

static void test_refusals(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    double g[1] = {1.0};
    assert_int_equal(s_submit(b, "c", "r", 1, "spin", g, 1, 1, 0), PROTO_REFUSE_UNKNOWN_PLUGIN);
    s_worker(b, "w", "spin", 0, 1);
    assert_int_equal(s_submit(b, "c", "r", 1, "nope", g, 1, 1, 0), PROTO_REFUSE_UNKNOWN_PLUGIN);
    assert_int_equal(s_submit(b, "c", "r", 1, "spin", g, 1, 1, 0), 0);
    assert_int_equal(s_submit(b, "c", "r", 2, "spin", g, 1, 1, 0), PROTO_REFUSE_RUN_MISMATCH);
    assert_int_equal(s_submit(b, "c", "r2", 1, "spin", g, 1, 1, PROTO_SUBMIT_REPLAY),
                     PROTO_REFUSE_NOT_RECORDED);
    char names[64];
    s_worker(b, "w2", "alpha", 1, 1);
    broker_catalog_names(&b->catalog, names, sizeof names);
    assert_string_equal(names, "alpha, spin");
    s_broker_destroy(&b);
}

/* A run is its owner's: another identity is refused whatever it sends (the
 * right seed, a wrong one, 0 items), and the owner's stream stays where it
 * was. A parked run's job moves to an unparked run that waits for it too. */
static void test_owner_and_parking(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    broker_worker_t *w = s_worker(b, "w", "spin", 1, 0);
    double g[2] = {1.0, 2.0};
    s_who = "owner-a";
    assert_int_equal(s_submit(b, "ca", "r", 1, "spin", g, 2, 1, 0), 0);
    s_who = "owner-b";
    assert_int_equal(s_submit(b, "cb", "r", 1, "spin", g, 1, 1, 0), PROTO_REFUSE_NOT_PERMITTED);
    assert_int_equal(s_submit(b, "cb", "r", 2, "spin", g, 1, 1, 0), PROTO_REFUSE_NOT_PERMITTED);
    assert_int_equal(s_submit(b, "cb", "r", 1, "spin", g, 0, 1, 0), PROTO_REFUSE_NOT_PERMITTED);
    broker_run_t *r = broker_runs_get(&b->runs, "r");
    assert_int_equal(r->client_len, 2);
    assert_memory_equal(r->client, "ca", 2);
    assert_string_equal(r->owner, "owner-a");
    assert_int_equal(r->outstanding, 2);
    /* Parked: no worker gets its jobs. */
    assert_int_equal(broker_runs_park(&b->runs, r), 2);
    assert_true(broker_runs_check(&b->runs));
    broker_registry_add_credits(&b->registry, w, 4);
    assert_null(broker_runs_pick(&b->runs, w));
    /* owner-b's own run asks for genome 2.0 too: that job leaves the parked run. */
    assert_int_equal(s_submit(b, "cb", "rb", 1, "spin", &g[1], 1, 1, 0), 0);
    assert_true(broker_runs_check(&b->runs));
    broker_eval_t *e = broker_runs_pick(&b->runs, w);
    assert_non_null(e);
    assert_ptr_equal(e->live->home, broker_runs_get(&b->runs, "rb"));
    assert_null(broker_runs_pick(&b->runs, w));
    broker_runs_enqueue(&b->runs, e->live->home, e, 1); /* back, for the unpark count below */
    assert_int_equal(broker_runs_unpark(&b->runs, r), 1);
    assert_true(broker_runs_check(&b->runs));
    s_who = "local";
    s_broker_destroy(&b);
}

/* The caps on runs per key and in all, on queued bytes per run, and an idle
 * run leaving RAM and coming back from the store with its seed and owner. */
static void test_caps_and_idle_runs(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    s_worker(b, "w", "spin", 0, 0);
    double g[3] = {1.0, 2.0, 3.0};
    b->max_runs_per_key = 2;
    b->max_runs = 3;
    s_who = "k1";
    assert_int_equal(s_submit(b, "c1", "r1", 1, "spin", g, 1, 1, 0), 0);
    assert_int_equal(s_submit(b, "c1", "r2", 1, "spin", g, 1, 1, 0), 0);
    assert_int_equal(s_submit(b, "c1", "r3", 1, "spin", g, 1, 1, 0), PROTO_REFUSE_QUEUE_FULL);
    s_who = "k2";
    assert_int_equal(s_submit(b, "c2", "r4", 4, "spin", g, 1, 1, 0), 0);
    assert_int_equal(s_submit(b, "c2", "r5", 1, "spin", g, 1, 1, 0), PROTO_REFUSE_QUEUE_FULL);
    /* An existing run takes more work; its queued bytes are capped (its own
     * seed: r1's evaluation of 1.0 under seed 1 would be shared, not charged). */
    b->max_queued_bytes_per_run = 2 * (BROKER_EVAL_QUEUED_BYTES + sizeof(double));
    assert_int_equal(s_submit(b, "c2", "r4", 4, "spin", &g[1], 1, 2, 0), 0);
    assert_int_equal(s_submit(b, "c2", "r4", 4, "spin", &g[2], 1, 3, 0), PROTO_REFUSE_QUEUE_FULL);
    broker_run_t *r4 = broker_runs_get(&b->runs, "r4");
    assert_int_equal(r4->genome_bytes, 2 * (BROKER_EVAL_QUEUED_BYTES + sizeof(double)));
    assert_int_equal(r4->use->runs, 1);
    assert_int_equal(r4->use->outstanding, 2);
    /* A run with nothing in flight leaves RAM and comes back on use. */
    b->max_runs = 10;
    assert_int_equal(s_submit(b, "c2", "idle", 77, "spin", g, 0, 1, 0), 0);
    broker_client_flush(b);
    b->now_ms = 1000000;
    broker_quota_sweep(b, 0, 1);
    assert_null(broker_runs_get(&b->runs, "idle"));
    assert_non_null(broker_runs_get(&b->runs, "r4")); /* work waiting: stays */
    broker_run_t *back = broker_quota_find_run(b, "idle");
    assert_non_null(back);
    assert_int_equal(back->seed, 77);
    assert_string_equal(back->owner, "k2");
    assert_int_equal(back->use->runs, 2);
    s_who = "k1"; /* still not k1's */
    assert_int_equal(s_submit(b, "c1", "idle", 77, "spin", g, 0, 1, 0), PROTO_REFUSE_NOT_PERMITTED);
    assert_true(broker_runs_check(&b->runs));
    s_who = "local";
    s_broker_destroy(&b);
}

static void test_resend_after_reconnect(void **state)
{
    (void)state;
    broker_t *b = s_broker(3);
    broker_worker_t *w = s_worker(b, "w", "spin", 0, 4);
    double g[2] = {1.0, 2.0};
    assert_int_equal(s_submit(b, "old-conn", "r", 3, "spin", g, 2, 10, 0), 0);
    assert_int_equal(broker_dispatch_turn(b), 2);
    proto_outcome_t o = s_outcome(w->jobs_head->live->job_id, PROTO_STATUS_OK, 1.0);
    broker_dispatch_outcome(b, w, &o);
    o = s_outcome(w->jobs_head->live->job_id, PROTO_STATUS_OK, 2.0);
    broker_dispatch_outcome(b, w, &o);
    broker_client_flush(b);
    broker_run_t *run = broker_runs_get(&b->runs, "r");
    assert_int_equal(broker_runs_ack(&b->runs, run, 10), 1);
    /* the client comes back on a new connection: the unacked result (tag 11)
     * is queued again, to the new routing id */
    assert_int_equal(s_submit(b, "new-conn", "r", 3, "spin", g, 0, 0, 0), 0);
    assert_int_equal(run->n_outbox, 1);
    assert_int_equal(run->outbox[0].tag, 11);
    assert_int_equal(run->client_len, strlen("new-conn"));
    assert_memory_equal(run->client, "new-conn", run->client_len);
    broker_client_flush(b);
    assert_int_equal(broker_table_size(run->unacked), 1);
    s_broker_destroy(&b);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_single_flight_across_runs_and_no_cache),
        cmocka_unit_test(test_settled_result_keeps_what_it_answers_with),
        cmocka_unit_test(test_retry_accounting),
        cmocka_unit_test(test_dropped_worker_requeue_and_late_result),
        cmocka_unit_test(test_round_robin_fairness),
        cmocka_unit_test(test_refusals),
        cmocka_unit_test(test_resend_after_reconnect),
        cmocka_unit_test(test_owner_and_parking),
        cmocka_unit_test(test_caps_and_idle_runs),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
