/* test_client_embedded.c: libfitfarm with the embedded local pool (the
 * fitfarm-broker and fitfarm-worker programs spawned by this process) and the
 * bundled zdt1 plugin from $FITFARM_BUILD_DIR/plugins: blocking evaluation
 * checked against the ZDT1 formula, streaming submit/poll, each result's
 * provenance (worker, host, time stamp; a cached answer's), an unknown plugin,
 * the children being those programs (not forks of this test), nothing left
 * running after fitfarm_client_destroy, a pool started by a thread that then
 * exits still working, and the default plugin folders found with no
 * plugin_dir.
 *
 * Outside reference: ZDT1 as defined by Zitzler, Deb and Thiele, "Comparison
 * of Multiobjective Evolutionary Algorithms: Empirical Results", Evolutionary
 * Computation 8(2), 2000: n = 30, f1 = x1, g = 1 + 9 * sum_{i=2..n} x_i / (n-1),
 * f2 = g * (1 - sqrt(f1 / g)). Computed here independently of the plugin. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <errno.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <pthread.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "client/include/fitfarm.h"
#include "client/lib/pool.h"

#define N_VARS 30

/* ZDT1 (Zitzler, Deb, Thiele 2000), straight from the definition. */
static void s_zdt1(const double *x, double f[2])
{
    double sum = 0;
    for (int i = 1; i < N_VARS; i++)
        sum += x[i];
    double g = 1.0 + 9.0 * sum / (N_VARS - 1);
    f[0] = x[0];
    f[1] = g * (1.0 - sqrt(f[0] / g));
}

/* Test genomes in [0, 1): splitmix64 (Blackman & Vigna), top 53 bits. */
static double s_uniform(uint64_t *state)
{
    uint64_t z = (*state += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    z ^= z >> 31;
    return (double)(z >> 11) * 0x1.0p-53;
}

static void s_close(double got, double want, const char *what, size_t i)
{
    /* The plugin may sum in another order: allow a few ulps of the sum. */
    if (!(fabs(got - want) <= 1e-12 * (1.0 + fabs(want))))
        fail_msg("genome %zu: %s = %.17g, ZDT1 formula gives %.17g", i, what, got, want);
}

static fitfarm_client_t *s_pool(unsigned slots, char *err, size_t errlen)
{
    const char *build = getenv("FITFARM_BUILD_DIR");
    static char dir[4096];
    snprintf(dir, sizeof dir, "%s/plugins", build ? build : ".");
    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.slots = slots;
    opts.plugin_dir = dir;
    opts.connect_timeout_ms = 20000;
    fitfarm_client_t *client = NULL;
    int rc = fitfarm_client_new(&opts, &client, err, errlen);
    if (rc != 0)
        fail_msg("embedded pool did not start (%s): %s", fitfarm_strerror(rc), err);
    return client;
}

static int s_setup(void **state)
{
    char err[1200];
    *state = s_pool(2, err, sizeof err);
    return *state ? 0 : -1;
}

static int s_teardown(void **state)
{
    fitfarm_client_t *client = *state;
    fitfarm_client_destroy(&client);
    return 0;
}

/* Usage: an embedded pool evaluating 1000 ZDT1 genomes in one blocking call. */
static void test_evaluate_zdt1(void **state)
{
    fitfarm_client_t *client = *state;
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.seed = 7;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("zdt1", "{\"n\": 30}", 1, &batch), 0);
    static double genomes[1000][N_VARS];
    uint64_t rng = 2000;
    for (size_t i = 0; i < 1000; i++) {
        for (int k = 0; k < N_VARS; k++)
            genomes[i][k] = s_uniform(&rng);
        assert_int_equal(fitfarm_batch_add_f64(batch, genomes[i], N_VARS), (long)i);
    }
    int rc = fitfarm_evaluate(run, batch, NULL, NULL, 120000);
    if (rc != 0)
        fail_msg("evaluate: %s", fitfarm_client_error(client));
    for (size_t i = 0; i < 1000; i++) {
        fitfarm_result_t res = FITFARM_RESULT_INIT;
        assert_int_equal(fitfarm_batch_result(batch, i, 0, &res), 0);
        if (res.status != FITFARM_STATUS_OK)
            fail_msg("genome %zu: %s: %s", i, fitfarm_status_name(res.status), res.error);
        assert_int_equal(res.n_fitness, 2);
        double want[2];
        s_zdt1(genomes[i], want);
        s_close(res.fitness[0], want[0], "f1", i);
        s_close(res.fitness[1], want[1], "f2", i);
    }
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
}

/* Streaming: every result arrives once through poll, in whatever order. */
static void test_submit_poll(void **state)
{
    fitfarm_client_t *client = *state;
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("zdt1", NULL, 2, &batch), 0);
    static double genomes[200][N_VARS];
    uint64_t rng = 3000;
    for (size_t i = 0; i < 200; i++) {
        for (int k = 0; k < N_VARS; k++)
            genomes[i][k] = s_uniform(&rng);
        fitfarm_batch_add_f64(batch, genomes[i], N_VARS);
    }
    assert_int_equal(fitfarm_submit(run, batch, 60000), 0);
    static uint8_t seen[400];
    memset(seen, 0, sizeof seen);
    size_t got = 0;
    fitfarm_result_t res = FITFARM_RESULT_INIT;
    while (got < 400) {
        int rc = fitfarm_poll(run, &res, 60000);
        if (rc != 1)
            fail_msg("poll after %zu results: %d %s", got, rc, fitfarm_client_error(client));
        size_t slot = res.index * 2 + res.replicate;
        assert_int_equal(seen[slot], 0);
        seen[slot] = 1;
        got++;
        assert_int_equal(res.status, FITFARM_STATUS_OK);
        double want[2];
        s_zdt1(genomes[res.index], want);
        s_close(res.fitness[0], want[0], "f1", res.index);
        s_close(res.fitness[1], want[1], "f2", res.index);
    }
    assert_int_equal(fitfarm_poll(run, &res, 200), 0);
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
}

/* Provenance: a result names the worker that computed it, on this machine
 * (its host is what POSIX gethostname() says here), a CPU time, and a time
 * stamp between the call's start and end on CLOCK_REALTIME (POSIX); a cached
 * answer carries the original evaluation's provenance bit for bit; and a
 * caller built against the struct before provenance (a smaller size) gets
 * nothing written past it. */
static void test_result_provenance(void **state)
{
    fitfarm_client_t *client = *state;
    char host[256] = "";
    assert_int_equal(gethostname(host, sizeof host), 0);
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    ro.run_id = "provenance-a";
    fitfarm_run_t *run = NULL, *again = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    ro.run_id = "provenance-b";
    assert_int_equal(fitfarm_run_open(client, &ro, &again), 0);
    fitfarm_batch_t *first = NULL, *second = NULL;
    assert_int_equal(fitfarm_batch_new("zdt1", NULL, 1, &first), 0);
    assert_int_equal(fitfarm_batch_new("zdt1", NULL, 1, &second), 0);
    static double genomes[20][N_VARS];
    uint64_t rng = 4000;
    for (size_t i = 0; i < 20; i++) {
        for (int k = 0; k < N_VARS; k++)
            genomes[i][k] = s_uniform(&rng);
        fitfarm_batch_add_f64(first, genomes[i], N_VARS);
        fitfarm_batch_add_f64(second, genomes[i], N_VARS);
    }
    struct timespec t0, t1;
    clock_gettime(CLOCK_REALTIME, &t0);
    assert_int_equal(fitfarm_evaluate(run, first, NULL, NULL, 60000), 0);
    clock_gettime(CLOCK_REALTIME, &t1);
    assert_int_equal(fitfarm_evaluate(again, second, NULL, NULL, 60000), 0);
    double lo = (double)t0.tv_sec + t0.tv_nsec / 1e9 - 0.01;
    double hi = (double)t1.tv_sec + t1.tv_nsec / 1e9 + 0.01;
    for (size_t i = 0; i < 20; i++) {
        fitfarm_result_t a = FITFARM_RESULT_INIT, b = FITFARM_RESULT_INIT;
        assert_int_equal(fitfarm_batch_result(first, i, 0, &a), 0);
        assert_int_equal(fitfarm_batch_result(second, i, 0, &b), 0);
        assert_int_equal(a.cached, 0);
        assert_int_equal(b.cached, 1);
        assert_true(a.worker[0] != '\0');
        assert_string_equal(a.host, host);
        assert_true(a.cpu_seconds >= 0 && a.cpu_seconds < 10);
        if (!(a.finished_at >= lo && a.finished_at <= hi))
            fail_msg("genome %zu: finished_at %.6f outside [%.6f, %.6f]", i, a.finished_at, lo, hi);
        assert_string_equal(b.worker, a.worker);
        assert_string_equal(b.host, a.host);
        assert_memory_equal(&b.cpu_seconds, &a.cpu_seconds, sizeof a.cpu_seconds);
        assert_int_equal(b.peak_rss_kb, a.peak_rss_kb);
        assert_memory_equal(&b.finished_at, &a.finished_at, sizeof a.finished_at);
    }
    struct {
        fitfarm_result_t res;
        unsigned char canary[64];
    } old;
    memset(&old, 0xa5, sizeof old);
    old.res.size = offsetof(fitfarm_result_t, worker);
    assert_int_equal(fitfarm_batch_result(first, 0, 0, &old.res), 0);
    const unsigned char *tail = (const unsigned char *)&old.res + offsetof(fitfarm_result_t, worker);
    for (size_t k = 0; k < sizeof old.res - offsetof(fitfarm_result_t, worker); k++)
        assert_int_equal(tail[k], 0xa5);
    assert_int_equal(old.res.n_fitness, 2);
    fitfarm_batch_destroy(&first);
    fitfarm_batch_destroy(&second);
    fitfarm_run_destroy(&run);
    fitfarm_run_destroy(&again);
}

static void test_unknown_plugin(void **state)
{
    fitfarm_client_t *client = *state;
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("no-such-plugin", NULL, 1, &batch), 0);
    double g = 0.5;
    fitfarm_batch_add_f64(batch, &g, 1);
    assert_int_equal(fitfarm_evaluate(run, batch, NULL, NULL, 20000), FITFARM_EPLUGIN);
    const char *msg = fitfarm_client_error(client);
    if (!strstr(msg, "no-such-plugin") || !strstr(msg, "zdt1"))
        fail_msg("the error should name the plugin and the pool's plugins: %s", msg);
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
}

static void s_assert_gone(pid_t pid, const char *what)
{
    assert_true(pid > 0);
    /* Reaped by destroy: no zombie left, and no process with that PID of ours. */
    errno = 0;
    if (kill(pid, 0) == 0 || errno != ESRCH)
        fail_msg("the embedded %s (pid %d) is still there", what, (int)pid);
    int status;
    assert_int_equal(waitpid(pid, &status, WNOHANG), -1);
    assert_int_equal(errno, ECHILD);
}

/* The child runs the named program (spawned), not a copy of this test. */
static void s_assert_program(pid_t pid, const char *name)
{
    char link[64], exe[4096];
    snprintf(link, sizeof link, "/proc/%d/exe", (int)pid);
    ssize_t n = readlink(link, exe, sizeof exe - 1);
    assert_true(n > 0);
    exe[n] = '\0';
    const char *base = strrchr(exe, '/');
    if (!base || strcmp(base + 1, name) != 0)
        fail_msg("pid %d runs %s, not %s", (int)pid, exe, name);
}

static void test_destroy_leaves_nothing(void **state)
{
    (void)state;
    char err[1200];
    fitfarm_client_t *client = s_pool(1, err, sizeof err);
    pid_t broker = -1, worker = -1;
    const char *dir = NULL;
    client_pool_test_last(&broker, &worker, &dir);
    assert_true(broker > 0 && worker > 0 && broker != worker);
    s_assert_program(broker, "fitfarm-broker");
    s_assert_program(worker, "fitfarm-worker");
    assert_int_equal(kill(broker, 0), 0);
    assert_int_equal(kill(worker, 0), 0);
    char dir_copy[512];
    snprintf(dir_copy, sizeof dir_copy, "%s", dir);
    struct stat st;
    assert_int_equal(stat(dir_copy, &st), 0);
    fitfarm_client_destroy(&client);
    assert_null(client);
    s_assert_gone(broker, "broker");
    s_assert_gone(worker, "worker");
    assert_int_equal(stat(dir_copy, &st), -1); /* the private folder is removed */
}

/* One ZDT1 genome of 30 halves, checked against the formula. */
static void s_evaluate_one(fitfarm_client_t *client)
{
    fitfarm_run_options_t ro = FITFARM_RUN_OPTIONS_INIT;
    fitfarm_run_t *run = NULL;
    assert_int_equal(fitfarm_run_open(client, &ro, &run), 0);
    fitfarm_batch_t *batch = NULL;
    assert_int_equal(fitfarm_batch_new("zdt1", NULL, 1, &batch), 0);
    double x[N_VARS];
    for (int k = 0; k < N_VARS; k++)
        x[k] = 0.5;
    fitfarm_batch_add_f64(batch, x, N_VARS);
    if (fitfarm_evaluate(run, batch, NULL, NULL, 30000) != 0)
        fail_msg("evaluate: %s", fitfarm_client_error(client));
    fitfarm_result_t res = FITFARM_RESULT_INIT;
    assert_int_equal(fitfarm_batch_result(batch, 0, 0, &res), 0);
    assert_int_equal(res.status, FITFARM_STATUS_OK);
    double want[2];
    s_zdt1(x, want);
    s_close(res.fitness[0], want[0], "f1", 0);
    s_close(res.fitness[1], want[1], "f2", 0);
    fitfarm_batch_destroy(&batch);
    fitfarm_run_destroy(&run);
}

static void *s_start_in_thread(void *arg)
{
    char err[1200];
    *(fitfarm_client_t **)arg = s_pool(1, err, sizeof err);
    return NULL;
}

/* A host thread starts the pool and ends (a Python thread pool does that).
 * A death signal tied to the starting thread (PR_SET_PDEATHSIG) would stop
 * the daemons here; the lifeline pipe belongs to the process. */
static void test_pool_outlives_its_thread(void **state)
{
    (void)state;
    fitfarm_client_t *client = NULL;
    pthread_t t;
    assert_int_equal(pthread_create(&t, NULL, s_start_in_thread, &client), 0);
    assert_int_equal(pthread_join(t, NULL), 0);
    assert_non_null(client);
    struct timespec pause = {0, 500 * 1000 * 1000}; /* time for a signal to land */
    nanosleep(&pause, NULL);
    pid_t broker = -1, worker = -1;
    client_pool_test_last(&broker, &worker, NULL);
    assert_int_equal(kill(broker, 0), 0);
    assert_int_equal(kill(worker, 0), 0);
    assert_int_equal(waitpid(broker, NULL, WNOHANG), 0); /* not exited */
    assert_int_equal(waitpid(worker, NULL, WNOHANG), 0);
    s_evaluate_one(client);
    fitfarm_client_destroy(&client);
}

/* No plugin_dir: the worker program finds the build tree's plugins itself. */
static void test_default_plugins(void **state)
{
    (void)state;
    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.slots = 1;
    opts.connect_timeout_ms = 20000;
    fitfarm_client_t *client = NULL;
    char err[1200];
    if (fitfarm_client_new(&opts, &client, err, sizeof err) != 0)
        fail_msg("embedded pool without plugin_dir: %s", err);
    s_evaluate_one(client);
    fitfarm_client_destroy(&client);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_evaluate_zdt1),
        cmocka_unit_test(test_submit_poll),
        cmocka_unit_test(test_result_provenance),
        cmocka_unit_test(test_unknown_plugin),
    };
    const struct CMUnitTest alone[] = {
        cmocka_unit_test(test_destroy_leaves_nothing),
        cmocka_unit_test(test_pool_outlives_its_thread),
        cmocka_unit_test(test_default_plugins),
    };
    int failed = cmocka_run_group_tests(tests, s_setup, s_teardown);
    return failed + cmocka_run_group_tests(alone, NULL, NULL);
}
