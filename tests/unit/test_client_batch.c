/* test_client_batch.c: what libfitfarm puts on the wire and what it makes of
 * the answers, against a scripted broker in a thread of this test (a ROUTER
 * socket on tcp://127.0.0.1:*): tags unique within a run and laid out as
 * base + index * replicates + replicate, SUBMIT chunks of at most 4096 items
 * and about 8 MiB, f64 genomes as little-endian IEEE 754 doubles, duplicate
 * results dropped, ACKs sent, refusals mapped to codes.
 *
 * The scripted broker answers plugin "echo" with fitness [first genome double,
 * replicate] and sends every RESULTS message twice (at-least-once delivery);
 * "nosuch" is refused as an unknown plugin, "full" as queue full, "silent"
 * is accepted and never answered. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <poll.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <zmq.h>

#include "client/include/fitfarm.h"
#include "msg.h"

typedef struct {
    uint64_t tag;
    uint32_t replicate;
    uint32_t len;
    uint8_t head[24]; /* first bytes of the genome */
    uint64_t chunk;   /* which SUBMIT carried it */
} seen_item_t;

typedef struct {
    pthread_t thread;
    atomic_int stop;
    char endpoint[128];
    pthread_mutex_t lock;
    seen_item_t *items;
    size_t n_items, cap_items;
    uint32_t chunk_sizes[64];
    size_t chunk_bytes[64];
    size_t n_chunks;
    size_t n_acked;
    pthread_barrier_t ready;
} fake_broker_t;

static void s_send(void *sock, zmq_msg_t *id, const proto_msg_t *msg)
{
    uint8_t *buf;
    size_t len;
    assert_int_equal(proto_msg_encode(msg, &buf, &len), PROTO_OK);
    zmq_send(sock, zmq_msg_data(id), zmq_msg_size(id), ZMQ_SNDMORE);
    zmq_send(sock, buf, len, 0);
    free(buf);
}

static void s_on_submit(fake_broker_t *fb, void *sock, zmq_msg_t *id, proto_submit_t *s)
{
    pthread_mutex_lock(&fb->lock);
    size_t bytes = 0;
    for (uint32_t i = 0; i < s->n_items; i++) {
        if (fb->n_items == fb->cap_items) {
            fb->cap_items = fb->cap_items ? fb->cap_items * 2 : 1024;
            fb->items = realloc(fb->items, fb->cap_items * sizeof *fb->items);
        }
        seen_item_t *it = &fb->items[fb->n_items++];
        memset(it, 0, sizeof *it);
        it->tag = s->items[i].tag;
        it->replicate = s->items[i].replicate;
        it->len = s->items[i].genome_len;
        memcpy(it->head, s->items[i].genome, it->len < 24 ? it->len : 24);
        it->chunk = fb->n_chunks;
        bytes += s->items[i].genome_len;
    }
    if (fb->n_chunks < 64) {
        fb->chunk_sizes[fb->n_chunks] = s->n_items;
        fb->chunk_bytes[fb->n_chunks] = bytes;
    }
    fb->n_chunks++;
    pthread_mutex_unlock(&fb->lock);

    proto_msg_t reply;
    memset(&reply, 0, sizeof reply);
    if (strcmp(s->plugin, "norecord") == 0 && s->n_items > 1) {
        /* A refusal about one request: the second item of the chunk. */
        reply.type = PROTO_REFUSED;
        reply.u.refused.code = PROTO_REFUSE_NOT_RECORDED;
        reply.u.refused.batch_tag = s->batch_tag;
        reply.u.refused.run_id = s->run_id;
        reply.u.refused.text = "replay: never recorded";
        reply.u.refused.has_tag = 1;
        reply.u.refused.tag = s->items[1].tag;
        s_send(sock, id, &reply);
        return;
    }
    if (strcmp(s->plugin, "nosuch") == 0 || strcmp(s->plugin, "full") == 0) {
        reply.type = PROTO_REFUSED;
        int unknown = s->plugin[0] == 'n';
        reply.u.refused.code = unknown ? PROTO_REFUSE_UNKNOWN_PLUGIN : PROTO_REFUSE_QUEUE_FULL;
        reply.u.refused.batch_tag = s->batch_tag;
        reply.u.refused.run_id = s->run_id;
        reply.u.refused.text = unknown ? "no plugin nosuch; the pool has: echo" : "run over 10 items";
        s_send(sock, id, &reply);
        return;
    }
    reply.type = PROTO_ACCEPTED;
    reply.u.accepted.run_id = s->run_id;
    reply.u.accepted.batch_tag = s->batch_tag;
    reply.u.accepted.n_accepted = s->n_items;
    s_send(sock, id, &reply);
    if (strcmp(s->plugin, "silent") == 0)
        return;
    proto_result_t *res = calloc(s->n_items, sizeof *res);
    double *fit = calloc(2 * (size_t)s->n_items, sizeof *fit);
    for (uint32_t i = 0; i < s->n_items; i++) {
        double first = 0;
        if (s->items[i].genome_len >= 8) {
            uint64_t bits = 0;
            for (int b = 7; b >= 0; b--)
                bits = (bits << 8) | s->items[i].genome[b];
            memcpy(&first, &bits, sizeof first);
        }
        fit[2 * i] = first;
        fit[2 * i + 1] = s->items[i].replicate;
        res[i].tag = s->items[i].tag;
        res[i].status = PROTO_STATUS_OK;
        res[i].seed = s->items[i].tag ^ 0x5555;
        res[i].n_fitness = 2;
        res[i].fitness = &fit[2 * i];
        res[i].error = "";
        res[i].worker = "scripted";
        res[i].host = "";
    }
    reply.type = PROTO_RESULTS;
    reply.u.results.run_id = s->run_id;
    reply.u.results.n_results = s->n_items;
    reply.u.results.results = res;
    s_send(sock, id, &reply);
    s_send(sock, id, &reply); /* at-least-once: the client must drop the copy */
    free(res);
    free(fit);
}

static void *s_broker_main(void *arg)
{
    fake_broker_t *fb = arg;
    void *ctx = zmq_ctx_new();
    void *sock = zmq_socket(ctx, ZMQ_ROUTER);
    int zero = 0;
    zmq_setsockopt(sock, ZMQ_LINGER, &zero, sizeof zero);
    zmq_bind(sock, "tcp://127.0.0.1:*");
    size_t len = sizeof fb->endpoint;
    zmq_getsockopt(sock, ZMQ_LAST_ENDPOINT, fb->endpoint, &len);
    pthread_barrier_wait(&fb->ready);
    while (!atomic_load(&fb->stop)) {
        zmq_pollitem_t item = {sock, 0, ZMQ_POLLIN, 0};
        if (zmq_poll(&item, 1, 50) <= 0)
            continue;
        zmq_msg_t id, body;
        zmq_msg_init(&id);
        zmq_msg_init(&body);
        zmq_msg_recv(&id, sock, 0);
        zmq_msg_recv(&body, sock, 0);
        proto_msg_t *msg = NULL;
        if (proto_msg_decode(zmq_msg_data(&body), zmq_msg_size(&body), NULL, &msg, NULL) ==
            PROTO_OK) {
            if (msg->type == PROTO_STATUS_REQ) {
                proto_msg_t st;
                memset(&st, 0, sizeof st);
                st.type = PROTO_STATUS;
                proto_worker_info_t w = {"w1",   "localhost", "x86_64", 1, 0, 1,
                                         (char *[]){"echo@1"}, 0.0, "active",
                                         (double[]){0.0}};
                st.u.status.n_workers = 1;
                st.u.status.workers = &w;
                s_send(sock, &id, &st);
            } else if (msg->type == PROTO_SUBMIT) {
                s_on_submit(fb, sock, &id, &msg->u.submit);
            } else if (msg->type == PROTO_ACK) {
                pthread_mutex_lock(&fb->lock);
                fb->n_acked += msg->u.ack.n_tags;
                pthread_mutex_unlock(&fb->lock);
            }
        }
        proto_msg_destroy(&msg);
        zmq_msg_close(&id);
        zmq_msg_close(&body);
    }
    zmq_close(sock);
    zmq_ctx_term(ctx);
    return NULL;
}

static int s_setup(void **state)
{
    fake_broker_t *fb = calloc(1, sizeof *fb);
    pthread_mutex_init(&fb->lock, NULL);
    pthread_barrier_init(&fb->ready, NULL, 2);
    pthread_create(&fb->thread, NULL, s_broker_main, fb);
    pthread_barrier_wait(&fb->ready);
    *state = fb;
    return 0;
}

static int s_teardown(void **state)
{
    fake_broker_t *fb = *state;
    atomic_store(&fb->stop, 1);
    pthread_join(fb->thread, NULL);
    pthread_barrier_destroy(&fb->ready);
    pthread_mutex_destroy(&fb->lock);
    free(fb->items);
    free(fb);
    return 0;
}

static fitfarm_client_t *s_connect(fake_broker_t *fb)
{
    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.broker = fb->endpoint;
    opts.insecure = 1; /* a scripted broker on loopback */
    opts.connect_timeout_ms = 5000;
    fitfarm_client_t *client = NULL;
    char err[256];
    int rc = fitfarm_client_new(&opts, &client, err, sizeof err);
    if (rc != 0)
        fail_msg("connect: %s", err);
    return client;
}

/* Usage: connect, open a run, evaluate a batch, read its results. */
static void test_usage_example(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_client_t *client = s_connect(fb);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.seed = 42;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    assert_int_equal(strncmp(fitfarm_run_id(run), "run-", 4), 0);
    assert_int_equal(strlen(fitfarm_run_id(run)), 4 + 16);

    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("echo", NULL, 2, &batch), 0);
    for (int i = 0; i < 3; i++) {
        double g[2] = {i + 0.5, -1};
        assert_int_equal(fitfarm_batch_add_f64(batch, g, 2), i);
    }
    assert_int_equal(fitfarm_evaluate(run, batch, NULL, NULL, 10000), 0);
    for (size_t i = 0; i < 3; i++)
        for (unsigned r = 0; r < 2; r++) {
            fitfarm_result_t res = FITFARM_RESULT_INIT;
            assert_int_equal(fitfarm_batch_result(batch, i, r, &res), 0);
            assert_int_equal(res.status, FITFARM_STATUS_OK);
            assert_int_equal(res.index, i);
            assert_int_equal(res.replicate, r);
            assert_int_equal(res.n_fitness, 2);
            assert_true(res.fitness[0] == i + 0.5 && res.fitness[1] == r);
            assert_string_equal(res.error, "");
            /* The seed is the broker's, per request (the scripted broker
             * sends tag ^ 0x5555), not derived again by the client. */
            assert_int_equal(res.seed, (uint64_t)(i * 2 + r) ^ 0x5555);
        }
    fitfarm_run_stats_t st = FITFARM_RUN_STATS_INIT;
    assert_int_equal(fitfarm_run_stats(run, &st), 0);
    assert_int_equal(st.submitted, 6);
    assert_int_equal(st.accepted, 6);
    assert_int_equal(st.delivered, 6);
    /* A batch is evaluated once: evaluating a finished batch again returns
     * at once and sends nothing. */
    pthread_mutex_lock(&fb->lock);
    size_t chunks = fb->n_chunks;
    pthread_mutex_unlock(&fb->lock);
    assert_int_equal(fitfarm_evaluate(run, batch, NULL, NULL, 1000), 0);
    assert_int_equal(fitfarm_submit(run, batch, 1000), FITFARM_EINVAL);
    pthread_mutex_lock(&fb->lock);
    assert_int_equal(fb->n_chunks, chunks);
    pthread_mutex_unlock(&fb->lock);
    fitfarm_batch_destroy(&batch);
    assert_null(batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
    assert_null(client);
}

/* IEEE 754 binary64 bit patterns (IEEE 754-2008, table 3.5 layout): 1.0 is
 * 0x3FF0000000000000, -2.0 is 0xC000000000000000, 0.1 rounds to
 * 0x3FB999999999999A; on the wire least significant byte first. */
static void test_f64_little_endian(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_client_t *client = s_connect(fb);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = "le";
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("echo", "{}", 1, &batch), 0);
    double g[3] = {1.0, -2.0, 0.1};
    assert_int_equal(fitfarm_batch_add_f64(batch, g, 3), 0);
    pthread_mutex_lock(&fb->lock);
    size_t before = fb->n_items;
    pthread_mutex_unlock(&fb->lock);
    assert_int_equal(fitfarm_evaluate(run, batch, NULL, NULL, 10000), 0);
    static const uint8_t want[24] = {0, 0, 0, 0, 0, 0, 0xf0, 0x3f, 0, 0, 0, 0, 0, 0, 0, 0xc0,
                                     0x9a, 0x99, 0x99, 0x99, 0x99, 0x99, 0xb9, 0x3f};
    pthread_mutex_lock(&fb->lock);
    assert_int_equal(fb->n_items, before + 1);
    assert_int_equal(fb->items[before].len, 24);
    assert_memory_equal(fb->items[before].head, want, 24);
    pthread_mutex_unlock(&fb->lock);
    /* Opaque genomes go as given. */
    fitfarm_batch_t *raw = NULL;
    assert_int_equal(fitfarm_batch_new("echo", NULL, 1, &raw), 0);
    assert_int_equal(fitfarm_batch_add_bytes(raw, "abc", 3), 0);
    assert_int_equal(fitfarm_batch_add_bytes(raw, "abc", 0), FITFARM_EINVAL);
    assert_int_equal(fitfarm_evaluate(run, raw, NULL, NULL, 10000), 0);
    pthread_mutex_lock(&fb->lock);
    assert_int_equal(fb->items[fb->n_items - 1].len, 3);
    assert_memory_equal(fb->items[fb->n_items - 1].head, "abc", 3);
    pthread_mutex_unlock(&fb->lock);
    fitfarm_batch_destroy(&raw);
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
}

static void s_count_progress(size_t done, size_t total, void *arg)
{
    size_t *seen = arg; /* calls, last done, last total */
    assert_true(done <= total);
    assert_true(seen[0] == 0 || done >= seen[1]); /* never goes back */
    seen[0]++;
    seen[1] = done;
    seen[2] = total;
}

/* Tags: unique within the run, slot s of a batch gets base + s with
 * s = index * replicates + replicate; large batches split into chunks. */
static void test_tags_and_chunks(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_client_t *client = s_connect(fb);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = "tags";
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);

    pthread_mutex_lock(&fb->lock);
    size_t first_item = fb->n_items, first_chunk = fb->n_chunks;
    pthread_mutex_unlock(&fb->lock);
    /* 5000 genomes x 2 replicates = 10000 items: 4096 + 4096 + 1808. */
    fitfarm_batch_t *a = NULL, *b = NULL;
    assert_int_equal(fitfarm_batch_new("echo", NULL, 2, &a), 0);
    for (int i = 0; i < 5000; i++) {
        double g = i;
        assert_int_equal(fitfarm_batch_add_f64(a, &g, 1), i);
    }
    size_t seen[3] = {0, 0, 0};
    assert_int_equal(fitfarm_evaluate(run, a, s_count_progress, seen, 30000), 0);
    assert_true(seen[0] >= 1 && seen[1] == 10000 && seen[2] == 10000);
    assert_int_equal(fitfarm_batch_new("echo", NULL, 1, &b), 0);
    for (int i = 0; i < 10; i++) {
        double g = 10000 + i;
        fitfarm_batch_add_f64(b, &g, 1);
    }
    assert_int_equal(fitfarm_evaluate(run, b, NULL, NULL, 10000), 0);

    pthread_mutex_lock(&fb->lock);
    assert_int_equal(fb->n_chunks - first_chunk, 4);
    assert_int_equal(fb->chunk_sizes[first_chunk], 4096);
    assert_int_equal(fb->chunk_sizes[first_chunk + 1], 4096);
    assert_int_equal(fb->chunk_sizes[first_chunk + 2], 1808);
    assert_int_equal(fb->chunk_sizes[first_chunk + 3], 10);
    size_t n = fb->n_items - first_item;
    assert_int_equal(n, 10010);
    seen_item_t *it = &fb->items[first_item];
    uint64_t base_a = it[0].tag;
    for (size_t k = 0; k < 10000; k++) {
        /* The genome tells the index, so the tag layout can be checked. */
        double idx;
        memcpy(&idx, it[k].head, 8); /* this test runs on little-endian x86-64 */
        uint64_t want = base_a + (uint64_t)idx * 2 + it[k].replicate;
        if (it[k].tag != want)
            fail_msg("item %zu: tag %llu, want %llu", k, (unsigned long long)it[k].tag,
                     (unsigned long long)want);
    }
    /* The second batch's tags follow the first's: no tag repeats in the run. */
    assert_true(it[10000].tag == base_a + 10000);
    for (size_t k = 10000; k < 10010; k++)
        assert_true(it[k].tag == base_a + k);
    pthread_mutex_unlock(&fb->lock);

    /* Every result delivered, each once, and acknowledged (copies too). */
    for (int i = 0; i < 5000; i++) {
        fitfarm_result_t res = FITFARM_RESULT_INIT;
        assert_int_equal(fitfarm_batch_result(a, (size_t)i, 1, &res), 0);
        assert_true(res.fitness[0] == i && res.fitness[1] == 1);
    }
    fitfarm_batch_destroy(&a);
    fitfarm_batch_destroy(&b);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
}

/* Genomes of 1 MiB (the per-genome limit): 8 MiB per chunk, so 20 go as 8 + 8 + 4. */
static void test_chunk_bytes(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_client_t *client = s_connect(fb);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("echo", NULL, 1, &batch), 0);
    size_t n = PROTO_MAX_GENOME_BYTES / 8;
    double *g = calloc(n, sizeof *g);
    for (int i = 0; i < 20; i++)
        assert_int_equal(fitfarm_batch_add_f64(batch, g, n), i);
    assert_int_equal(fitfarm_batch_add_f64(batch, g, n + 1), FITFARM_EINVAL);
    free(g);
    pthread_mutex_lock(&fb->lock);
    size_t first = fb->n_chunks;
    pthread_mutex_unlock(&fb->lock);
    assert_int_equal(fitfarm_evaluate(run, batch, NULL, NULL, 30000), 0);
    pthread_mutex_lock(&fb->lock);
    assert_int_equal(fb->n_chunks - first, 3);
    assert_int_equal(fb->chunk_sizes[first], 8);
    assert_int_equal(fb->chunk_sizes[first + 1], 8);
    assert_int_equal(fb->chunk_sizes[first + 2], 4);
    assert_true(fb->chunk_bytes[first] == 8u * 1024 * 1024);
    pthread_mutex_unlock(&fb->lock);
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
}

/* Streaming: each result polled exactly once although the broker sent two copies. */
static void test_poll_exactly_once(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_client_t *client = s_connect(fb);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("echo", NULL, 3, &batch), 0);
    for (int i = 0; i < 50; i++) {
        double g = i;
        fitfarm_batch_add_f64(batch, &g, 1);
    }
    assert_int_equal(fitfarm_submit(run, batch, 60000), 0);
    uint8_t seen[150] = {0};
    fitfarm_result_t res = FITFARM_RESULT_INIT;
    int got = 0, rc;
    while ((rc = fitfarm_poll(run, &res, 1000)) == 1) {
        size_t slot = res.index * 3 + res.replicate;
        assert_true(slot < 150);
        assert_int_equal(seen[slot], 0);
        seen[slot] = 1;
        assert_true(res.batch == batch && res.fitness[0] == (double)res.index);
        got++;
        if (got == 150)
            break;
    }
    assert_int_equal(got, 150);
    assert_int_equal(fitfarm_poll(run, &res, 300), 0); /* the copies were dropped */
    pthread_mutex_lock(&fb->lock);
    size_t acked = fb->n_acked;
    pthread_mutex_unlock(&fb->lock);
    assert_true(acked >= 150);
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
}

static void test_refusals_and_timeout(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_client_t *client = s_connect(fb);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    double g = 1;
    fitfarm_batch_t *batch = NULL;

    assert_int_equal(fitfarm_batch_new("nosuch", NULL, 1, &batch), 0);
    fitfarm_batch_add_f64(batch, &g, 1);
    assert_int_equal(fitfarm_evaluate(run, batch, NULL, NULL, 5000), FITFARM_EPLUGIN);
    assert_non_null(strstr(fitfarm_client_error(client), "nosuch"));
    assert_non_null(strstr(fitfarm_client_error(client), "echo"));
    fitfarm_batch_destroy(&batch);

    assert_int_equal(fitfarm_batch_new("full", NULL, 1, &batch), 0);
    fitfarm_batch_add_f64(batch, &g, 1);
    assert_int_equal(fitfarm_submit(run, batch, 60000), FITFARM_EQUEUEFULL);
    assert_non_null(strstr(fitfarm_client_error(client), "run over 10 items"));
    fitfarm_batch_destroy(&batch);

    assert_int_equal(fitfarm_batch_new("silent", NULL, 1, &batch), 0);
    fitfarm_batch_add_f64(batch, &g, 1);
    assert_int_equal(fitfarm_evaluate(run, batch, NULL, NULL, 300), FITFARM_ETIMEDOUT);
    assert_non_null(strstr(fitfarm_client_error(client), "0 of 1 results"));
    fitfarm_result_t res = FITFARM_RESULT_INIT;
    assert_int_equal(fitfarm_batch_result(batch, 0, 0, &res), FITFARM_ETIMEDOUT);
    assert_int_equal(fitfarm_batch_result(batch, 1, 0, &res), FITFARM_EINVAL);
    fitfarm_batch_destroy(&batch);

    /* Misuse is EINVAL, not a crash. */
    assert_int_equal(fitfarm_batch_new("echo", NULL, 0, &batch), FITFARM_EINVAL);
    assert_int_equal(fitfarm_batch_new("echo", "[1]", 1, &batch), FITFARM_EINVAL);
    assert_null(batch);
    fitfarm_run_options_t dup = FITFARM_RUN_OPTIONS_INIT;
    dup.run_id = fitfarm_run_id(run);
    fitfarm_run_t *run2 = NULL;
    assert_int_equal(fitfarm_run_open(client, &dup, &run2), FITFARM_EINVAL);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
}

static void test_no_broker(void **state)
{
    (void)state;
    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.broker = "tcp://127.0.0.1:1"; /* nothing listens on port 1 */
    opts.insecure = 1;
    opts.connect_timeout_ms = 300;
    fitfarm_client_t *client = (fitfarm_client_t *)&opts;
    char err[256];
    assert_int_equal(fitfarm_client_new(&opts, &client, err, sizeof err), FITFARM_ECONNECT);
    assert_null(client);
    assert_non_null(strstr(err, "tcp://127.0.0.1:1"));
    assert_string_equal(fitfarm_strerror(FITFARM_EPLUGIN), "the pool has no such plugin");
    assert_string_equal(fitfarm_status_name(FITFARM_STATUS_TIMEOUT), "timeout");
}

/* ABI growth: a struct whose size is 0 (not initialised with its INIT
 * macro) is refused with a sentence saying what to do; a shorter size (an
 * older caller) is filled only as far as it reaches. */
static void test_struct_sizes(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_options_t bad = {0};
    bad.broker = fb->endpoint;
    bad.insecure = 1;
    fitfarm_client_t *client = NULL;
    char err[256];
    assert_int_equal(fitfarm_client_new(&bad, &client, err, sizeof err), FITFARM_EINVAL);
    assert_non_null(strstr(err, "FITFARM_OPTIONS_INIT"));
    client = s_connect(fb);
    fitfarm_run_options_t ro = {0};
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), FITFARM_EINVAL);
    assert_non_null(strstr(fitfarm_client_error(client), "FITFARM_RUN_OPTIONS_INIT"));
    ro.size = sizeof ro;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("echo", NULL, 1, &batch), 0);
    double g = 7;
    fitfarm_batch_add_f64(batch, &g, 1);
    assert_int_equal(fitfarm_evaluate(run, batch, NULL, NULL, 10000), 0);
    /* An older caller whose result struct ends before `seed`. */
    unsigned char raw[sizeof(fitfarm_result_t) + 16];
    memset(raw, 0xAB, sizeof raw);
    fitfarm_result_t *old = (fitfarm_result_t *)raw;
    old->size = offsetof(fitfarm_result_t, seed);
    assert_int_equal(fitfarm_batch_result(batch, 0, 0, old), 0);
    assert_int_equal(old->status, FITFARM_STATUS_OK);
    for (size_t k = offsetof(fitfarm_result_t, seed); k < sizeof raw; k++)
        assert_int_equal(raw[k], 0xAB);
    fitfarm_result_t zero = {0};
    assert_int_equal(fitfarm_batch_result(batch, 0, 0, &zero), FITFARM_EINVAL);
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
}

/* A refusal names the request it is about by tag on the wire; the library
 * gives the caller the genome index and replicate, no text parsed. */
static void test_structured_refusal(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_client_t *client = s_connect(fb);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("norecord", NULL, 2, &batch), 0);
    for (int i = 0; i < 2; i++) {
        double g = i;
        fitfarm_batch_add_f64(batch, &g, 1);
    }
    assert_int_equal(fitfarm_submit(run, batch, 5000), FITFARM_ENOTRECORDED);
    fitfarm_refusal_t why = FITFARM_REFUSAL_INIT;
    assert_int_equal(fitfarm_refusal(run, &why), 0);
    assert_int_equal(why.code, FITFARM_ENOTRECORDED);
    assert_int_equal(why.has_request, 1);
    assert_ptr_equal(why.batch, batch);
    assert_int_equal(why.index, 0); /* item 1 = genome 0, replicate 1 */
    assert_int_equal(why.replicate, 1);
    assert_string_equal(why.text, "replay: never recorded");
    assert_non_null(strstr(fitfarm_client_error(client), "genome 0, replicate 1"));
    fitfarm_batch_destroy(&batch);
    assert_int_equal(fitfarm_refusal(run, &why), 0);
    assert_null(why.batch); /* the batch is gone: nothing dangles */
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
}

/* A caller with its own event loop: submit without waiting, sleep in poll(2)
 * on the library's descriptor and next time-out, process, read results. */
static void test_own_event_loop(void **state)
{
    fake_broker_t *fb = *state;
    fitfarm_client_t *client = s_connect(fb);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("echo", NULL, 1, &batch), 0);
    for (int i = 0; i < 40; i++) {
        double g = i;
        fitfarm_batch_add_f64(batch, &g, 1);
    }
    int fd = -1;
    assert_int_equal(fitfarm_client_fd(client, &fd), 0);
    assert_true(fd >= 0);
    assert_int_equal(fitfarm_submit(run, batch, 0), 0); /* returns at once */
    int got = 0;
    for (int turn = 0; turn < 1000 && got < 40; turn++) {
        int wait = fitfarm_client_next_timeout(client);
        struct pollfd p = {.fd = fd, .events = POLLIN};
        (void)poll(&p, 1, wait < 0 || wait > 50 ? 50 : wait);
        assert_true(fitfarm_client_process(client) >= 0);
        fitfarm_result_t res = FITFARM_RESULT_INIT;
        while (fitfarm_poll(run, &res, 0) == 1) {
            assert_true(res.fitness[0] == (double)res.index);
            got++;
        }
    }
    assert_int_equal(got, 40);
    fitfarm_run_stats_t st = FITFARM_RUN_STATS_INIT;
    assert_int_equal(fitfarm_run_stats(run, &st), 0);
    assert_int_equal(st.accepted, 40);
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
    fitfarm_client_destroy(&client);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_f64_little_endian),
        cmocka_unit_test(test_tags_and_chunks),
        cmocka_unit_test(test_chunk_bytes),
        cmocka_unit_test(test_poll_exactly_once),
        cmocka_unit_test(test_refusals_and_timeout),
        cmocka_unit_test(test_no_broker),
        cmocka_unit_test(test_struct_sizes),
        cmocka_unit_test(test_structured_refusal),
        cmocka_unit_test(test_own_event_loop),
    };
    return cmocka_run_group_tests(tests, s_setup, s_teardown);
}
