/* test_broker_store.c: the store's sticky write failures, through the same
 * functions the loop calls, on an in-memory store. SQLite's own
 * PRAGMA max_page_count makes writes fail with SQLITE_FULL exactly as a full
 * disk does (sqlite.org/pragma.html#pragma_max_page_count), so no disk needs
 * filling: a turn whose write fails is rolled back whole (nothing partial
 * committed), the store refuses new batches with a sentence naming the
 * cause, keeps every later write in memory, and when space returns one
 * commit writes all of it. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>
#include <sqlite3.h>

#include "broker/client_io.h"
#include "broker/core.h"
#include "broker/dispatch.h"
#include "broker/worker_io.h"

/* A broker on the store in dir (NULL: a scratch store), its timers started. */
static broker_t *s_broker_on(const char *dir)
{
    broker_t *b = calloc(1, sizeof *b);
    broker_core_init(b, 5000, 1000, 3, dir);
    assert_non_null(b->store);
    broker_worker_timers_start(b);
    return b;
}

static broker_t *s_broker(void)
{
    return s_broker_on(NULL);
}

static void s_remove_dir(const char *dir)
{
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf %s", dir);
    assert_int_equal(system(cmd), 0);
}

static void s_broker_destroy(broker_t **b)
{
    broker_core_fini(*b);
    free(*b);
    *b = NULL;
}

static broker_worker_t *s_worker(broker_t *b, uint32_t credits)
{
    proto_plugin_info_t pi = {.name = (char *)"spin", .version = (char *)"1.0", .objectives = 1};
    proto_hello_t h = {.name = (char *)"w1",
                       .host = (char *)"localhost",
                       .arch = (char *)"x86_64",
                       .slots = 4,
                       .n_plugins = 1,
                       .plugins = &pi};
    broker_worker_t *w = broker_worker_on_hello(b, (const uint8_t *)"w1", 2, &h);
    broker_registry_add_credits(&b->registry, w, credits);
    return w;
}

/* Submits genomes {x0 + i} for i < n under tags tag0 + i. Returns the
 * refusal code or 0. */
static int s_submit(broker_t *b, const char *run_id, double x0, uint32_t n, uint64_t tag0)
{
    proto_item_t *items = calloc(n, sizeof *items);
    double *g = calloc(n, sizeof *g);
    for (uint32_t i = 0; i < n; i++) {
        g[i] = x0 + i;
        items[i].tag = tag0 + i;
        items[i].genome_len = sizeof(double);
        items[i].genome = (uint8_t *)&g[i];
    }
    proto_submit_t s = {.run_id = (char *)run_id,
                        .run_seed = 7,
                        .batch_tag = 1,
                        .plugin = (char *)"spin",
                        .params = (char *)"{}",
                        .n_items = n,
                        .items = items};
    int rc = broker_client_submit(b, (const uint8_t *)"c1", 2, "local", &s);
    free(items);
    free(g);
    return rc;
}

/* Completes the worker's first n held jobs, each with outcome like (its
 * job id set). */
static void s_finish(broker_t *b, broker_worker_t *w, uint32_t n, proto_outcome_t like)
{
    for (uint32_t i = 0; i < n && w->jobs_head; i++) {
        like.job_id = w->jobs_head->live->job_id;
        broker_dispatch_outcome(b, w, &like);
    }
}

/* Completes the worker's first n held jobs as failed with a long error, so
 * every result needs pages of its own. */
static void s_complete(broker_t *b, broker_worker_t *w, uint32_t n)
{
    static char err[3000];
    memset(err, 'e', sizeof err - 1);
    s_finish(b, w, n, (proto_outcome_t){.status = PROTO_STATUS_FAILED, .error = err});
}

static long long s_count(broker_t *b, const char *sql)
{
    sqlite3_stmt *st = NULL;
    long long n = -1;
    assert_int_equal(sqlite3_prepare_v2(broker_store_db(b->store), sql, -1, &st, NULL), SQLITE_OK);
    if (sqlite3_step(st) == SQLITE_ROW)
        n = sqlite3_column_int64(st, 0);
    sqlite3_finalize(st);
    return n;
}

static void s_pages(broker_t *b, const char *sql)
{
    assert_int_equal(sqlite3_exec(broker_store_db(b->store), sql, NULL, NULL, NULL), SQLITE_OK);
}

/* Usage example: a healthy turn commits its writes and the store says so. */
static void test_usage_example(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    broker_worker_t *w = s_worker(b, 100);
    assert_int_equal(s_submit(b, "r1", 0.0, 20, 1), 0);
    assert_int_equal(broker_dispatch_turn(b), 20);
    s_complete(b, w, 20);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_false(broker_store_failing(b->store));
    assert_int_equal(broker_store_retry_in_ms(b->store), -1);
    assert_int_equal(s_count(b, "SELECT count(*) FROM evaluations WHERE status IS NOT NULL"), 20);
    assert_int_equal(broker_store_unwritten(b->store), 0);
    s_broker_destroy(&b);
}

static void test_full_store_fails_the_turn_and_recovers(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    broker_worker_t *w = s_worker(b, 1000);
    assert_int_equal(s_submit(b, "r1", 0.0, 100, 1), 0);
    assert_int_equal(broker_dispatch_turn(b), 100);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_int_equal(s_count(b, "SELECT count(*) FROM requests"), 100);

    /* The disk is full: not one page more. */
    s_pages(b, "PRAGMA max_page_count = 1"); /* SQLite keeps it at the current size */
    s_complete(b, w, 50);
    assert_true(broker_store_failing(b->store));
    assert_int_equal(broker_store_commit(b->store), -1);
    /* Nothing of the failed turn is in the file, not even the writes before
     * the one that failed. */
    assert_int_equal(s_count(b, "SELECT count(*) FROM evaluations WHERE status IS NOT NULL"), 0);
    assert_int_equal(s_count(b, "SELECT count(*) FROM simulations"), 0);
    assert_int_equal(broker_store_unwritten(b->store), 50);
    assert_true(broker_store_retry_in_ms(b->store) >= 0);

    /* New work is refused with the cause; the sentence is what clients see. */
    assert_int_equal(s_submit(b, "r2", 1000.0, 5, 1), PROTO_REFUSE_STORE);
    assert_null(broker_runs_get(&b->runs, "r2"));
    char text[1200];
    broker_store_describe(b->store, text, sizeof text);
    assert_non_null(strstr(text, "store cannot write: database or disk is full at :memory:; "
                                 "50 results waiting to be written"));

    /* Results of jobs already running keep coming: kept, not written. */
    s_complete(b, w, 50);
    assert_int_equal(broker_store_unwritten(b->store), 100);
    broker_store_retry_now(b->store);
    assert_int_equal(broker_store_commit(b->store), -1); /* still full */
    assert_true(broker_store_failing(b->store));
    assert_int_equal(s_count(b, "SELECT count(*) FROM simulations"), 0);

    /* Space comes back: one commit writes everything kept. */
    s_pages(b, "PRAGMA max_page_count = 1000000");
    broker_store_retry_now(b->store);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_false(broker_store_failing(b->store));
    assert_int_equal(broker_store_unwritten(b->store), 0);
    assert_int_equal(s_count(b, "SELECT count(*) FROM evaluations WHERE status IS NOT NULL"), 100);
    assert_int_equal(s_count(b, "SELECT count(*) FROM simulations"), 100);
    assert_int_equal(s_count(b, "SELECT count(*) FROM simulations WHERE length(error) = 2999"), 100);
    /* and the store takes new work again */
    assert_int_equal(s_submit(b, "r2", 1000.0, 5, 1), 0);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_int_equal(s_count(b, "SELECT count(*) FROM requests WHERE run_id = 'r2'"), 5);
    s_broker_destroy(&b);
}

/* Turn after turn while full: each retry of the whole log fails whole, so
 * not one row lands until a retry succeeds, which then writes every result
 * once. */
static void test_nothing_partial_after_many_turns(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    broker_worker_t *w = s_worker(b, 1000);
    assert_int_equal(s_submit(b, "r1", 0.0, 300, 1), 0);
    assert_int_equal(broker_dispatch_turn(b), 300);
    assert_int_equal(broker_store_commit(b->store), 0);
    s_pages(b, "PRAGMA max_page_count = 1");
    /* Ten turns of 30 results while full: every one fails, nothing lands. */
    for (int turn = 0; turn < 10; turn++) {
        s_complete(b, w, 30);
        broker_store_retry_now(b->store);
        assert_int_equal(broker_store_commit(b->store), -1);
        assert_int_equal(s_count(b, "SELECT count(*) FROM simulations"), 0);
    }
    assert_int_equal(broker_store_unwritten(b->store), 300);
    s_pages(b, "PRAGMA max_page_count = 1000000");
    broker_store_retry_now(b->store);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_int_equal(s_count(b, "SELECT count(*) FROM simulations"), 300);
    assert_int_equal(s_count(b, "SELECT count(DISTINCT key) FROM simulations"), 300);
    s_broker_destroy(&b);
}

/* Completes the worker's first n held jobs as OK with fitness 1. */
static void s_complete_ok(broker_t *b, broker_worker_t *w, uint32_t n)
{
    double fit = 1.0;
    s_finish(b, w, n,
             (proto_outcome_t){
                 .status = PROTO_STATUS_OK, .n_fitness = 1, .fitness = &fit, .error = (char *)""});
}

/* The bound on a run's recorded request tags, read from the store for a run
 * that comes back from it: none, one past the highest, and no bound at all
 * for a tag past INT64_MAX (stored as a negative int64), which only an older
 * broker took: this one refuses tags past BROKER_TAG_MAX, naming the limit. */
static void test_request_tags_end(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    (void)s_worker(b, 100);
    assert_int_equal(broker_store_request_tags_end(b->store, "r1"), 0);
    assert_int_equal(s_submit(b, "r1", 0.0, 20, 5), 0);
    assert_int_equal(broker_store_request_tags_end(b->store, "r1"), 25);
    assert_int_equal(broker_store_request_tags_end(b->store, "other"), 0);
    assert_int_equal(s_submit(b, "r1", 100.0, 1, (UINT64_C(1) << 63) + 5),
                     PROTO_REFUSE_BAD_MESSAGE);
    assert_int_equal(s_submit(b, "r1", 101.0, 1, BROKER_TAG_MAX), 0);
    assert_true(broker_store_request_tags_end(b->store, "r1") == BROKER_TAG_MAX + 1);
    s_pages(b, "INSERT INTO requests(run_id, tag, batch_tag, replicate, key, cached, created)"
               " VALUES('r1', -3, 1, 0, zeroblob(32), 0, 0)");
    assert_true(broker_store_request_tags_end(b->store, "r1") == UINT64_MAX);
    s_broker_destroy(&b);
}

/* A tag the run already recorded is still checked against the store, both
 * for a run this broker made (its bound kept in RAM) and for one whose bound
 * is not known yet (as for a run loaded from the store): the same tag with
 * another genome is refused, the same tag with the same genome is answered
 * from the record without a new evaluation. */
static void test_recorded_tags_are_checked(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    broker_worker_t *w = s_worker(b, 100);
    assert_int_equal(s_submit(b, "r1", 0.0, 10, 1), 0);
    assert_int_equal(broker_dispatch_turn(b), 10);
    s_complete_ok(b, w, 10);
    assert_int_equal(broker_store_commit(b->store), 0);
    broker_run_t *run = broker_runs_get(&b->runs, "r1");
    assert_non_null(run);
    assert_true(run->tags_known);
    assert_int_equal(run->tags_end, 11);
    for (int pass = 0; pass < 2; pass++) {
        if (pass == 1)
            run->tags_known = 0; /* as a run read back from the store starts */
        assert_int_equal(s_submit(b, "r1", 50.0, 1, 10), PROTO_REFUSE_RUN_MISMATCH);
        assert_int_equal(s_submit(b, "r1", 9.0, 1, 10), 0);
        assert_int_equal(broker_dispatch_turn(b), 0);
    }
    assert_int_equal(run->tags_end, 11);
    /* New tags past the bound are new requests, and move it. */
    assert_int_equal(s_submit(b, "r1", 20.0, 5, 11), 0);
    assert_int_equal(run->tags_end, 16);
    assert_int_equal(broker_dispatch_turn(b), 5);
    s_broker_destroy(&b);
}

/* A store with no finished evaluation is mirrored in RAM, so a new key is
 * not looked up in it; once a result is evicted from RAM the store is asked
 * again, and the evicted result is answered from it, not evaluated again. */
static void test_cache_asks_the_store_after_an_eviction(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    broker_worker_t *w = s_worker(b, 100);
    assert_true(b->ram_holds_all_results);
    broker_evals_set_caps(&b->evals, 5, 0);
    assert_int_equal(s_submit(b, "r1", 0.0, 10, 1), 0);
    assert_int_equal(broker_dispatch_turn(b), 10);
    s_complete_ok(b, w, 10);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_true(b->evals.evictions > 0);
    uint64_t hits = b->evals.store_hits;
    /* Genome 0.0 was the first evaluated, so it left RAM. */
    assert_int_equal(s_submit(b, "r2", 0.0, 1, 1), 0);
    assert_int_equal(broker_dispatch_turn(b), 0);
    assert_int_equal(b->evals.store_hits, hits + 1);
    s_broker_destroy(&b);
}

/* A broker started on a store that holds finished evaluations asks it. */
static void test_store_with_results_is_not_mirrored(void **state)
{
    (void)state;
    char dir[] = "/tmp/fitfarm-store-test-XXXXXX";
    assert_non_null(mkdtemp(dir));
    for (int start = 0; start < 2; start++) {
        broker_t *b = s_broker_on(dir);
        broker_worker_t *w = s_worker(b, 100);
        if (start == 0) {
            assert_true(b->ram_holds_all_results);
            assert_int_equal(s_submit(b, "r1", 0.0, 3, 1), 0);
            assert_int_equal(broker_dispatch_turn(b), 3);
            s_complete_ok(b, w, 3);
            assert_int_equal(broker_store_commit(b->store), 0);
        } else {
            assert_false(b->ram_holds_all_results);
            assert_int_equal(s_submit(b, "r2", 0.0, 3, 1), 0);
            assert_int_equal(broker_dispatch_turn(b), 0); /* all three from the store */
            assert_int_equal(b->evals.store_hits, 3);
        }
        s_broker_destroy(&b);
    }
    s_remove_dir(dir);
}

/* A no-cache request still waiting at a stop is evaluated again after the
 * restart with the genome the store kept: the cached result it re-evaluates
 * keeps none in RAM (evals.h), so the store's row is the only copy. */
static void test_pending_no_cache_request_survives_a_restart(void **state)
{
    (void)state;
    char dir[] = "/tmp/fitfarm-store-test-XXXXXX";
    assert_non_null(mkdtemp(dir));
    for (int start = 0; start < 2; start++) {
        broker_t *b = s_broker_on(dir);
        broker_worker_t *w = s_worker(b, 100);
        if (start == 0) {
            assert_int_equal(s_submit(b, "r1", 6.5, 1, 1), 0);
            assert_int_equal(broker_dispatch_turn(b), 1);
            s_complete_ok(b, w, 1);
            size_t cur = 0;
            broker_eval_t *done = broker_table_next(b->evals.by_key, &cur);
            assert_true(done && done->state == BROKER_EVAL_DONE && done->live == NULL);
            /* The same genome again, no-cache: queued, not yet sent. */
            proto_item_t it = {.tag = 2, .genome_len = sizeof(double)};
            double g = 6.5;
            it.genome = (uint8_t *)&g;
            proto_submit_t sub = {.run_id = (char *)"r1", .run_seed = 7, .batch_tag = 2,
                                  .plugin = (char *)"spin", .params = (char *)"{}",
                                  .flags = PROTO_SUBMIT_NO_CACHE, .n_items = 1, .items = &it};
            assert_int_equal(broker_client_submit(b, (const uint8_t *)"c1", 2, "local", &sub), 0);
            assert_int_equal(broker_store_commit(b->store), 0);
        } else {
            assert_int_equal(broker_dispatch_turn(b), 1); /* the re-evaluation, requeued */
            broker_eval_t *again = w->jobs_head;
            assert_true(again && again->fresh);
            double sent = 0;
            assert_int_equal(again->live->genome_len, sizeof sent);
            memcpy(&sent, again->live->genome, sizeof sent);
            assert_true(sent == 6.5);
        }
        s_broker_destroy(&b);
    }
    s_remove_dir(dir);
}

/* Requests of run r1 the store says are owed (not acknowledged): acked = 0
 * and at or above the run's mark (store_sql.c, "Acknowledgements"). */
static long long s_owed(broker_t *b)
{
    return s_count(b, "SELECT count(*) FROM requests r JOIN runs u ON u.run_id = r.run_id"
                      " WHERE r.run_id = 'r1' AND r.acked = 0 AND r.tag >= u.acked_below");
}

static long long s_mark(broker_t *b)
{
    return s_count(b, "SELECT acked_below FROM runs WHERE run_id = 'r1'");
}

static void s_ack(broker_t *b, uint64_t first, uint64_t last)
{
    broker_store_note_ack(b->store, broker_runs_get(&b->runs, "r1"), first, last);
    assert_int_equal(broker_store_commit(b->store), 0);
}

/* Acknowledgements move the run's mark when nothing owed lies below them,
 * and write rows only for tags acknowledged ahead of an owed one; the mark
 * then passes those rows once. A request owed again (past the delivery cap)
 * brings the mark down without un-acknowledging the requests between; a
 * restarted broker loads the run only while something is owed. */
static void test_acknowledgements_move_the_mark(void **state)
{
    (void)state;
    char dir[] = "/tmp/fitfarm-store-test-XXXXXX";
    assert_non_null(mkdtemp(dir));
    broker_t *b = s_broker_on(dir);
    broker_worker_t *w = s_worker(b, 100);
    assert_int_equal(s_submit(b, "r1", 0.0, 10, 0), 0);
    assert_int_equal(broker_dispatch_turn(b), 10);
    s_complete_ok(b, w, 10);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_int_equal(s_mark(b), 0);
    assert_int_equal(s_owed(b), 10);

    s_ack(b, 0, 2);
    assert_int_equal(s_mark(b), 3);
    assert_int_equal(s_count(b, "SELECT count(*) FROM requests WHERE acked = 1"), 0);
    s_ack(b, 5, 7); /* ahead of 3 and 4: rows */
    assert_int_equal(s_mark(b), 3);
    assert_int_equal(s_count(b, "SELECT count(*) FROM requests WHERE acked = 1"), 3);
    assert_int_equal(s_owed(b), 4);
    s_ack(b, 3, 4); /* the mark passes 5..7 */
    assert_int_equal(s_mark(b), 8);
    assert_int_equal(s_owed(b), 2);
    s_ack(b, 9, 9);
    assert_int_equal(s_mark(b), 8);
    s_ack(b, 8, 8);
    assert_int_equal(s_mark(b), 10);
    assert_int_equal(s_owed(b), 0);

    broker_store_note_unack(b->store, broker_runs_get(&b->runs, "r1"), 4);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_int_equal(s_mark(b), 4);
    assert_int_equal(s_owed(b), 1);
    assert_int_equal(s_count(b, "SELECT count(*) FROM requests WHERE acked = 0 AND tag = 4"), 1);
    s_broker_destroy(&b);

    b = s_broker_on(dir); /* request 4 is owed: its run comes back */
    assert_non_null(broker_runs_get(&b->runs, "r1"));
    s_ack(b, 4, 4);
    assert_int_equal(s_mark(b), 10);
    assert_int_equal(s_owed(b), 0);
    s_broker_destroy(&b);

    b = s_broker_on(dir); /* nothing owed: the run stays in the store */
    assert_null(broker_runs_get(&b->runs, "r1"));
    w = s_worker(b, 100);
    /* Tags 20..24 after a gap, acknowledged: the mark passes the gap. */
    assert_int_equal(s_submit(b, "r1", 20.0, 5, 20), 0);
    assert_int_equal(broker_dispatch_turn(b), 5);
    s_complete_ok(b, w, 5);
    assert_int_equal(broker_store_commit(b->store), 0);
    s_ack(b, 20, 24);
    assert_int_equal(s_mark(b), 25);
    /* A new request in the gap is owed: the mark comes down to it. */
    assert_int_equal(s_submit(b, "r1", 50.0, 1, 12), 0);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_int_equal(s_mark(b), 12);
    assert_int_equal(s_owed(b), 1);
    assert_int_equal(s_count(b, "SELECT count(*) FROM requests WHERE acked = 0 AND tag = 12"), 1);
    s_broker_destroy(&b);
    s_remove_dir(dir);
}

/* New requests are written many to a statement (store.c,
 * STORE_REQUEST_ROWS); the ones still waiting for a full statement are
 * written before anything reads requests, so reads inside the turn see
 * every one, and the commit writes the rest. 130 = two full statements of
 * 64 and two left over. */
static void test_requests_in_groups_are_read_in_the_turn(void **state)
{
    (void)state;
    broker_t *b = s_broker();
    (void)s_worker(b, 200);
    assert_int_equal(s_submit(b, "r1", 0.0, 130, 0), 0);
    uint8_t key[PROTO_KEY_BYTES];
    int cached = -1, fresh = -1;
    assert_true(broker_store_find_request(b->store, "r1", 129, key, &cached, &fresh));
    assert_true(cached == 0 && fresh == 0);
    assert_true(broker_store_find_request(b->store, "r1", 0, key, &cached, &fresh));
    assert_int_equal(broker_store_request_tags_end(b->store, "r1"), 130);
    assert_int_equal(s_submit(b, "r1", 200.0, 3, 130), 0);
    assert_int_equal(broker_store_commit(b->store), 0);
    assert_int_equal(s_count(b, "SELECT count(*) FROM requests"), 133);
    assert_int_equal(s_count(b, "SELECT count(DISTINCT key) FROM requests"), 133);
    assert_int_equal(s_count(b, "SELECT max(tag) FROM requests"), 132);
    s_broker_destroy(&b);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_full_store_fails_the_turn_and_recovers),
        cmocka_unit_test(test_nothing_partial_after_many_turns),
        cmocka_unit_test(test_request_tags_end),
        cmocka_unit_test(test_recorded_tags_are_checked),
        cmocka_unit_test(test_cache_asks_the_store_after_an_eviction),
        cmocka_unit_test(test_store_with_results_is_not_mirrored),
        cmocka_unit_test(test_pending_no_cache_request_survives_a_restart),
        cmocka_unit_test(test_acknowledgements_move_the_mark),
        cmocka_unit_test(test_requests_in_groups_are_read_in_the_turn),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
