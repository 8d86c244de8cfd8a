/* test_broker_daemon.c: the whole broker (broker_main_run) in a forked child
 * on tcp://127.0.0.1:* with an endpoints file, driven by raw ZeroMQ DEALER
 * sockets speaking proto messages as a fake client and fake workers:
 * single flight over the wire (100 copies of one genome, one job, 100
 * results), the unknown-plugin refusal, bad bytes dropped while the broker
 * keeps serving, a silent worker's job re-queued to a second worker with the
 * same seed, the mixed-build warning, and a clean SIGTERM stop (exit 0). The
 * child is ended by its PID. Seeds are checked against Python's hashlib
 * (an independent BLAKE2b, RFC 7693) following the derivation in proto/key.h. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <inttypes.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>
#include <zmq.h>

#include <cmocka.h>

#include "broker/broker.h"
#include "msg.h"

static char s_dir[256];
static char s_clients_ep[256], s_workers_ep[256];
static pid_t s_child = -1;

static int64_t s_now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

/* The outside reference for a genome-mode seed: Python's hashlib.blake2b. */
static uint64_t s_python_seed(uint64_t run_seed, double genome, uint32_t replicate)
{
    char cmd[1024];
    snprintf(cmd, sizeof cmd,
             "/usr/bin/python3 -c \"import hashlib,struct;"
             "g=struct.pack('<d',%.17g);"
             "k=struct.pack('<Q',%" PRIu64 ")+b'ffseedv1';"
             "m=b'\\x00'+hashlib.blake2b(g,digest_size=32).digest()+struct.pack('<I',%u);"
             "print(struct.unpack('<Q',hashlib.blake2b(m,digest_size=32,key=k).digest()[:8])[0])\"",
             genome, run_seed, replicate);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    unsigned long long v = 0;
    assert_int_equal(fscanf(p, "%llu", &v), 1);
    assert_int_equal(pclose(p), 0);
    return (uint64_t)v;
}

static void s_send(void *sock, const proto_msg_t *msg)
{
    uint8_t *buf = NULL;
    size_t len = 0;
    assert_int_equal(proto_msg_encode(msg, &buf, &len), PROTO_OK);
    assert_int_equal(zmq_send(sock, buf, len, 0), (int)len);
    free(buf);
}

static void s_send_simple(void *sock, uint32_t type)
{
    proto_msg_t m = {.type = type};
    s_send(sock, &m);
}

/* Next message that is not a HEARTBEAT, or NULL after timeout_ms. */
static proto_msg_t *s_recv(void *sock, int timeout_ms)
{
    int64_t deadline = s_now_ms() + timeout_ms;
    for (;;) {
        int64_t left = deadline - s_now_ms();
        if (left <= 0)
            return NULL;
        zmq_pollitem_t it = {.socket = sock, .events = ZMQ_POLLIN};
        if (zmq_poll(&it, 1, (long)left) <= 0)
            continue;
        zmq_msg_t m;
        zmq_msg_init(&m);
        assert_true(zmq_msg_recv(&m, sock, 0) >= 0);
        proto_msg_t *msg = NULL;
        proto_err_t err;
        int rc = proto_msg_decode(zmq_msg_data(&m), zmq_msg_size(&m), NULL, &msg, &err);
        zmq_msg_close(&m);
        assert_int_equal(rc, PROTO_OK);
        if (msg->type != PROTO_HEARTBEAT)
            return msg;
        proto_msg_destroy(&msg);
    }
}

static proto_msg_t *s_expect(void *sock, uint32_t type)
{
    proto_msg_t *msg = s_recv(sock, 10000);
    assert_non_null(msg);
    if (msg->type != type)
        fail_msg("expected %s, got %s", proto_type_name((int)type), proto_type_name((int)msg->type));
    return msg;
}

static void *s_dealer(void *ctx, const char *ep)
{
    void *s = zmq_socket(ctx, ZMQ_DEALER);
    int zero = 0;
    zmq_setsockopt(s, ZMQ_LINGER, &zero, sizeof zero);
    assert_int_equal(zmq_connect(s, ep), 0);
    return s;
}

static void s_hello(void *sock, const char *name, uint8_t digest_byte, uint32_t credits)
{
    proto_plugin_info_t pi = {.name = (char *)"spin", .version = (char *)"1.0", .objectives = 2};
    memset(pi.digest, digest_byte, sizeof pi.digest);
    proto_msg_t m = {.type = PROTO_HELLO};
    m.u.hello = (proto_hello_t){.name = (char *)name,
                                .host = (char *)"testhost",
                                .arch = (char *)"x86_64",
                                .slots = 2,
                                .n_plugins = 1,
                                .plugins = &pi};
    s_send(sock, &m);
    proto_msg_t c = {.type = PROTO_CREDIT};
    c.u.credit.credits = credits;
    s_send(sock, &c);
}

static void s_submit(void *client, const char *plugin, uint64_t batch_tag, const double *genome,
                     uint32_t n, uint64_t tag0)
{
    proto_item_t *items = calloc(n, sizeof *items);
    for (uint32_t i = 0; i < n; i++)
        items[i] = (proto_item_t){.tag = tag0 + i,
                                  .replicate = 0,
                                  .genome_len = sizeof(double),
                                  .genome = (uint8_t *)genome};
    proto_msg_t m = {.type = PROTO_SUBMIT};
    m.u.submit = (proto_submit_t){.run_id = (char *)"r1",
                                  .run_seed = 1234,
                                  .seed_mode = PROTO_SEED_GENOME,
                                  .batch_tag = batch_tag,
                                  .plugin = (char *)plugin,
                                  .params = (char *)"{}",
                                  .n_items = n,
                                  .items = items};
    s_send(client, &m);
    free(items);
}

static void s_done(void *worker, uint64_t job_id, double f)
{
    double fit[2] = {f, f + 1};
    proto_outcome_t o = {.job_id = job_id,
                         .status = PROTO_STATUS_OK,
                         .n_fitness = 2,
                         .fitness = fit,
                         .cpu_seconds = 0.001,
                         .error = (char *)""};
    proto_msg_t m = {.type = PROTO_DONE};
    m.u.done = (proto_done_t){.credits = 1, .n_outcomes = 1, .outcomes = &o};
    s_send(worker, &m);
}

static proto_msg_t *s_status(void *client)
{
    s_send_simple(client, PROTO_STATUS_REQ);
    return s_expect(client, PROTO_STATUS);
}

static int s_setup(void **state)
{
    (void)state;
    snprintf(s_dir, sizeof s_dir, "/tmp/fitfarm-broker-test-XXXXXX");
    assert_non_null(mkdtemp(s_dir));
    char ep_file[512];
    snprintf(ep_file, sizeof ep_file, "%s/endpoints", s_dir);
    fflush(NULL);
    s_child = fork();
    assert_true(s_child >= 0);
    if (s_child == 0) {
        broker_config_t cfg = {.insecure = 1,
                               .clients_endpoint = "tcp://127.0.0.1:*",
                               .workers_endpoint = "tcp://127.0.0.1:*",
                               .liveness_ms = 800,
                               .heartbeat_ms = 100,
                               .endpoints_file = ep_file};
        exit(broker_main_run(&cfg));
    }
    int64_t deadline = s_now_ms() + 10000;
    FILE *f = NULL;
    while (!(f = fopen(ep_file, "r")) && s_now_ms() < deadline)
        usleep(10000);
    assert_non_null(f);
    assert_int_equal(fscanf(f, "clients %255s\nworkers %255s\n", s_clients_ep, s_workers_ep), 2);
    fclose(f);
    assert_non_null(strstr(s_clients_ep, "tcp://127.0.0.1:"));
    return 0;
}

static int s_teardown(void **state)
{
    (void)state;
    if (s_child > 0) {
        kill(s_child, SIGTERM);
        int status = 0;
        waitpid(s_child, &status, 0);
        s_child = -1;
        /* a clean stop: exit 0, no sanitizer report (which would exit non-zero) */
        assert_true(WIFEXITED(status));
        assert_int_equal(WEXITSTATUS(status), 0);
    }
    char path[512];
    snprintf(path, sizeof path, "%s/endpoints", s_dir);
    unlink(path);
    rmdir(s_dir);
    return 0;
}

static void test_broker_over_the_wire(void **state)
{
    (void)state;
    void *ctx = zmq_ctx_new();
    void *client = s_dealer(ctx, s_clients_ep);
    void *w1 = s_dealer(ctx, s_workers_ep);

    /* An empty pool refuses with a sentence that says so. */
    double g0 = 0.75;
    s_submit(client, "spin", 1, &g0, 1, 0);
    proto_msg_t *m = s_expect(client, PROTO_REFUSED);
    assert_string_equal(m->u.refused.text,
                        "no worker in the pool carries plugin 'spin'; the pool has no workers yet");
    proto_msg_destroy(&m);

    s_hello(w1, "w1", 0xab, 10);
    int64_t deadline = s_now_ms() + 10000;
    for (;;) {
        m = s_status(client);
        uint32_t n = m->u.status.n_workers;
        proto_msg_destroy(&m);
        if (n == 1)
            break;
        assert_true(s_now_ms() < deadline);
        usleep(20000);
    }

    /* 100 copies of one genome: one job, 100 results. */
    uint64_t want_seed = s_python_seed(1234, g0, 0);
    s_submit(client, "spin", 7, &g0, 100, 0);
    m = s_expect(client, PROTO_ACCEPTED);
    assert_int_equal(m->u.accepted.batch_tag, 7);
    assert_int_equal(m->u.accepted.n_accepted, 100);
    proto_msg_destroy(&m);
    m = s_expect(w1, PROTO_JOBS);
    assert_int_equal(m->u.jobs.n_jobs, 1);
    proto_job_t *job = &m->u.jobs.jobs[0];
    assert_string_equal(job->plugin, "spin");
    assert_string_equal(job->params, "{}");
    assert_int_equal(job->genome_len, sizeof(double));
    assert_memory_equal(job->genome, &g0, sizeof g0);
    assert_int_equal(job->seed, want_seed);
    uint64_t job1 = job->job_id;
    proto_msg_destroy(&m);
    s_done(w1, job1, 2.5);
    int seen[100] = {0};
    uint32_t got = 0;
    while (got < 100) {
        m = s_expect(client, PROTO_RESULTS);
        assert_string_equal(m->u.results.run_id, "r1");
        for (uint32_t i = 0; i < m->u.results.n_results; i++) {
            proto_result_t *r = &m->u.results.results[i];
            assert_true(r->tag < 100);
            assert_int_equal(seen[r->tag]++, 0);
            assert_int_equal(r->status, PROTO_STATUS_OK);
            assert_int_equal(r->cached, 0);
            assert_int_equal(r->seed, want_seed);
            assert_int_equal(r->n_fitness, 2);
            assert_true(r->fitness[0] == 2.5 && r->fitness[1] == 3.5);
            got++;
        }
        proto_msg_destroy(&m);
    }
    /* no extra job went out for the 99 copies */
    m = s_recv(w1, 300);
    assert_null(m);
    uint64_t tags[100];
    for (int i = 0; i < 100; i++)
        tags[i] = (uint64_t)i;
    proto_msg_t ack = {.type = PROTO_ACK};
    ack.u.ack = (proto_ack_t){.run_id = (char *)"r1", .n_tags = 100, .tags = tags};
    s_send(client, &ack);

    /* Unknown plugin: refused, naming what the pool has. */
    s_submit(client, "nope", 8, &g0, 1, 500);
    m = s_expect(client, PROTO_REFUSED);
    assert_int_equal(m->u.refused.code, PROTO_REFUSE_UNKNOWN_PLUGIN);
    assert_int_equal(m->u.refused.batch_tag, 8);
    assert_string_equal(m->u.refused.text,
                        "no worker in the pool carries plugin 'nope'; the pool has: spin");
    proto_msg_destroy(&m);

    /* Bad bytes on both sockets: dropped; the broker still serves. */
    assert_int_equal(zmq_send(client, "\xc1garbage", 8, 0), 8);
    assert_int_equal(zmq_send(w1, "\x93\x01", 2, 0), 2);
    assert_int_equal(zmq_send(client, "a", 1, ZMQ_SNDMORE), 1); /* two body frames */
    assert_int_equal(zmq_send(client, "b", 1, 0), 1);
    m = s_status(client);
    assert_int_equal(m->u.status.n_workers, 1);
    assert_int_equal(m->u.status.n_runs, 1);
    assert_string_equal(m->u.status.runs[0].run_id, "r1");
    assert_int_equal(m->u.status.runs[0].done, 100);
    assert_int_equal(m->u.status.runs[0].evaluated, 1); /* single flight: one simulation */
    assert_int_equal(m->u.status.runs[0].cached, 0);
    proto_msg_destroy(&m);

    /* A silent worker's job goes to a second worker with the same seed. */
    double g1 = 0.25;
    uint64_t seed1 = s_python_seed(1234, g1, 0);
    s_send_simple(w1, PROTO_HEARTBEAT);
    s_submit(client, "spin", 9, &g1, 1, 200);
    m = s_expect(client, PROTO_ACCEPTED);
    proto_msg_destroy(&m);
    m = s_expect(w1, PROTO_JOBS);
    assert_int_equal(m->u.jobs.n_jobs, 1);
    uint64_t lost_job = m->u.jobs.jobs[0].job_id;
    assert_int_equal(m->u.jobs.jobs[0].seed, seed1);
    proto_msg_destroy(&m);
    /* w3 joins with another build of spin 1.0: it gets no jobs (the first
     * build is pinned) and the pool gets a warning. */
    void *w3 = s_dealer(ctx, s_workers_ep);
    s_hello(w3, "w3", 0xcd, 10);
    /* w1 now says nothing; w2 joins with w1's build */
    void *w2 = s_dealer(ctx, s_workers_ep);
    s_hello(w2, "w2", 0xab, 10);
    int64_t joined = s_now_ms();
    proto_msg_t *jobs = NULL;
    deadline = s_now_ms() + 10000;
    while (!jobs && s_now_ms() < deadline) {
        s_send_simple(w2, PROTO_HEARTBEAT);
        jobs = s_recv(w2, 100);
    }
    assert_non_null(jobs);
    assert_int_equal(jobs->type, PROTO_JOBS);
    assert_true(s_now_ms() - joined >= 300); /* only after w1 fell silent past liveness */
    assert_int_equal(jobs->u.jobs.n_jobs, 1);
    assert_int_equal(jobs->u.jobs.jobs[0].seed, seed1);
    assert_memory_equal(jobs->u.jobs.jobs[0].genome, &g1, sizeof g1);
    assert_true(jobs->u.jobs.jobs[0].job_id != lost_job);
    s_done(w2, jobs->u.jobs.jobs[0].job_id, 9.0);
    proto_msg_destroy(&jobs);
    m = s_expect(client, PROTO_RESULTS);
    assert_int_equal(m->u.results.n_results, 1);
    assert_int_equal(m->u.results.results[0].tag, 200);
    assert_int_equal(m->u.results.results[0].seed, seed1);
    assert_true(m->u.results.results[0].fitness[0] == 9.0);
    proto_msg_destroy(&m);
    /* the dropped worker is told to start over */
    s_send_simple(w1, PROTO_HEARTBEAT);
    m = s_expect(w1, PROTO_REHELLO);
    proto_msg_destroy(&m);

    /* w3 (the other build) never got a job */
    m = s_recv(w3, 200);
    assert_true(m == NULL || m->type != PROTO_JOBS);
    proto_msg_destroy(&m);
    m = s_status(client);
    int found_w2 = 0;
    for (uint32_t i = 0; i < m->u.status.n_workers; i++) {
        const proto_worker_info_t *wi = &m->u.status.workers[i];
        if (strcmp(wi->name, "w2") == 0) {
            found_w2 = 1;
            assert_int_equal(wi->n_plugins, 1);
            assert_string_equal(wi->plugins[0], "spin@1.0");
        } else if (strcmp(wi->name, "w3") == 0) {
            assert_int_equal(wi->n_plugins, 0); /* carries no plugin the broker uses */
        }
    }
    assert_true(found_w2);
    assert_int_equal(m->u.status.n_warnings, 1);
    assert_string_equal(m->u.status.warnings[0],
                        "plugin spin 1.0 is reported with two different builds (digests "
                        "abababababab…, cdcdcdcdcdcd…): results may differ bitwise; only workers "
                        "with build abababababab… (the first one this store saw) get its jobs. "
                        "Give a new build a new plugin version.");
    proto_msg_destroy(&m);

    zmq_close(w3);
    zmq_close(w2);
    zmq_close(w1);
    zmq_close(client);
    zmq_ctx_term(ctx);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_broker_over_the_wire, s_setup, s_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
