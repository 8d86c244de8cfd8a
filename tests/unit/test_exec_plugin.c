/* test_exec_plugin.c: the exec plugin, through worker_exec_plugin_new and the
 * descriptor it returns, with real co-processes: the example simulator
 * client/examples/cantilever.py (checked against the closed form
 * delta = P L^3 / (3 E I)) and tests/unit/exec_fault.py, which misbehaves on
 * request (crash, garbage, hang, wrong counts, oversize lines, bad
 * introductions). Needs FITFARM_SOURCE_DIR (set by ctest) and python3. */
#include <errno.h>
#include <math.h>
#include <setjmp.h>
#include <signal.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cmocka.h>
#include <sodium.h>

#include "worker/exec_plugin.h"
#include "worker/exec_protocol.h"

static char s_python[512];
static char s_source[1024];

static void s_setup_env(void)
{
    const char *py = getenv("PYTHON");
    const char *src = getenv("FITFARM_SOURCE_DIR");
    snprintf(s_python, sizeof s_python, "%s", py && *py ? py : "/usr/bin/python3");
#ifdef FITFARM_SOURCE_DIR_DEFAULT
    if (!src)
        src = FITFARM_SOURCE_DIR_DEFAULT;
#endif
    if (!src) {
        fprintf(stderr, "FITFARM_SOURCE_DIR is not set (ctest sets it)\n");
        exit(1);
    }
    snprintf(s_source, sizeof s_source, "%s", src);
}

/* "NAME=PYTHON SOURCE/<script> args" */
static void s_spec(char *out, size_t outlen, const char *name, const char *script, const char *args)
{
    snprintf(out, outlen, "%s=%s %s/%s%s%s", name, s_python, s_source, script, args ? " " : "",
             args ? args : "");
}

static size_t s_genome(const double *genes, size_t n, uint8_t *out)
{
    for (size_t i = 0; i < n; i++) {
        uint64_t bits;
        memcpy(&bits, &genes[i], sizeof bits);
        for (int b = 0; b < 8; b++)
            out[i * 8 + (size_t)b] = (uint8_t)(bits >> (8 * b));
    }
    return n * 8;
}

static int s_eval(const fitfarm_plugin_t *p, void *ctx, const double *genes, size_t n,
                  uint64_t seed, double *fitness, char *err, size_t errlen)
{
    uint8_t g[64 * 8];
    assert_true(n <= 64);
    size_t len = s_genome(genes, n, g);
    err[0] = '\0';
    return p->evaluate(ctx, g, len, seed, fitness, err, errlen);
}

static int s_alive(long pid)
{
    /* Gone, or a zombie nobody reaped yet (a container's init may not): dead. */
    char path[64], buf[512];
    snprintf(path, sizeof path, "/proc/%ld/stat", pid);
    FILE *f = fopen(path, "r");
    if (!f)
        return 0;
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = '\0';
    const char *rp = strrchr(buf, ')');
    return rp && rp[1] == ' ' && rp[2] != 'Z' && rp[2] != 'X';
}

/* Uniform rectangular cantilever, end load: delta = P L^3 / (3 E I), I = b h^3 / 12
 * (Gere & Goodno, Mechanics of Materials, cantilever deflection table). */
static double s_uniform_deflection(double P, double L, double E, double b, double h)
{
    return P * L * L * L / (3.0 * E * (b * h * h * h / 12.0));
}

/* Usage: register the example simulator, create a context, evaluate. */
static void test_usage_cantilever(void **state)
{
    (void)state;
    char spec[2048], err[1024];
    const fitfarm_plugin_t *p = NULL;
    s_spec(spec, sizeof spec, "cantilever", "client/examples/cantilever.py", NULL);
    assert_int_equal(worker_exec_plugin_new(spec, &p, err, sizeof err), 0);
    assert_non_null(p);
    assert_string_equal(p->name, "cantilever");
    assert_string_equal(p->version, "1.0");
    assert_int_equal(p->objectives, 2);
    assert_int_equal(p->flags & FITFARM_PLUGIN_DETERMINISTIC, FITFARM_PLUGIN_DETERMINISTIC);
    assert_int_equal(p->abi_version, FITFARM_PLUGIN_ABI);
    assert_true(worker_exec_plugin_is_exec(p));
    /* The probe is gone; nothing runs until the first evaluation. */
    assert_int_equal(worker_exec_plugin_coprocess_pid(p), 0);

    void *ctx = NULL;
    fitfarm_plugin_info_t info = {0};
    assert_int_equal(p->create("{}", &ctx, &info, err, sizeof err), FITFARM_PLUGIN_OK);
    assert_int_equal(info.objectives, 2);

    /* Three equal genes 0.5: h = 0.01 + 0.5 * 0.04 = 0.03 m on the defaults
     * L = 1 m, P = 1000 N, E = 200 GPa, b = 0.02 m, rho = 7850 kg/m^3. */
    double genes[3] = {0.5, 0.5, 0.5}, fit[2];
    assert_int_equal(s_eval(p, ctx, genes, 3, 7, fit, err, sizeof err), FITFARM_PLUGIN_OK);
    double want = s_uniform_deflection(1000.0, 1.0, 200e9, 0.02, 0.03);
    assert_true(fabs(fit[0] - want) <= 1e-12 * want);
    /* mass = rho * b * h * L (a rectangular prism) */
    assert_true(fabs(fit[1] - 7850.0 * 0.02 * 0.03 * 1.0) <= 1e-12 * fit[1]);
    long pid = worker_exec_plugin_coprocess_pid(p);
    assert_true(pid > 0);
    p->destroy(ctx);

    /* Params reach the program: L = 2 m, P = 500 N, gene 0.25 -> h = 0.02 m. */
    assert_int_equal(p->create("{\"load\":500,\"length\":2}", &ctx, &info, err, sizeof err),
                     FITFARM_PLUGIN_OK);
    double g2[2] = {0.25, 0.25};
    assert_int_equal(s_eval(p, ctx, g2, 2, 7, fit, err, sizeof err), FITFARM_PLUGIN_OK);
    want = s_uniform_deflection(500.0, 2.0, 200e9, 0.02, 0.02);
    assert_true(fabs(fit[0] - want) <= 1e-12 * want);
    /* The same co-process served both contexts. */
    assert_int_equal(worker_exec_plugin_coprocess_pid(p), pid);

    /* The program refuses a gene outside [0, 1]: invalid, not failed. */
    double bad[2] = {0.5, 1.5};
    assert_int_equal(s_eval(p, ctx, bad, 2, 7, fit, err, sizeof err), FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "outside [0, 1]"));
    /* A genome that is not whole doubles never reaches the program. */
    uint8_t odd[12] = {0};
    assert_int_equal(p->evaluate(ctx, odd, sizeof odd, 7, fit, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "12 bytes"));
    double nan_gene[1] = {NAN};
    assert_int_equal(s_eval(p, ctx, nan_gene, 1, 7, fit, err, sizeof err), FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "not a finite number"));
    assert_int_equal(worker_exec_plugin_coprocess_pid(p), pid);
    p->destroy(ctx);

    /* Params that are not a JSON object are refused at create. */
    assert_int_equal(p->create("[1,2]", &ctx, &info, err, sizeof err), FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "not a JSON object"));

    worker_exec_plugin_destroy(&p);
    assert_null(p);
    assert_false(s_alive(pid));
}

/* The stepped-beam checks against scipy live in Python; run them here so
 * ctest runs them. */
static void test_cantilever_reference_script(void **state)
{
    (void)state;
    char cmd[2048];
    snprintf(cmd, sizeof cmd, "%s %s/tests/unit/ref_cantilever_check.py", s_python, s_source);
    int st = system(cmd);
    assert_true(WIFEXITED(st));
    assert_int_equal(WEXITSTATUS(st), 0);
}

/* The digest is BLAKE2b-256 (RFC 7693; libsodium) over the length-prefixed
 * command line and introduction line. */
static void test_digest(void **state)
{
    (void)state;
    char spec[2048], err[1024];
    const fitfarm_plugin_t *p = NULL;
    s_spec(spec, sizeof spec, "cantilever", "client/examples/cantilever.py", NULL);
    assert_int_equal(worker_exec_plugin_new(spec, &p, err, sizeof err), 0);
    const char *command = strchr(spec, '=') + 1;
    const char *intro = "{\"fitfarm_exec\": 1, \"name\": \"cantilever\", \"version\": \"1.0\", "
                        "\"objectives\": 2, \"deterministic\": true}";
    uint8_t buf[4096];
    size_t n = 0;
    const char *parts[2] = {command, intro};
    for (int i = 0; i < 2; i++) {
        uint64_t len = strlen(parts[i]);
        for (int b = 0; b < 8; b++)
            buf[n++] = (uint8_t)(len >> (8 * b));
        memcpy(buf + n, parts[i], len);
        n += len;
    }
    uint8_t want[32];
    crypto_generichash(want, sizeof want, buf, n, NULL, 0);
    assert_memory_equal(worker_exec_plugin_digest(p), want, 32);

    /* A different command line is a different build. */
    const fitfarm_plugin_t *q = NULL;
    char spec2[2048];
    snprintf(spec2, sizeof spec2, "cantilever2=%s  %s/client/examples/cantilever.py", s_python,
             s_source);
    assert_int_equal(worker_exec_plugin_new(spec2, &q, err, sizeof err), 0);
    assert_memory_not_equal(worker_exec_plugin_digest(p), worker_exec_plugin_digest(q), 32);
    assert_null(worker_exec_plugin_digest((const fitfarm_plugin_t *)&spec));
    worker_exec_plugin_destroy(&q);
    worker_exec_plugin_destroy(&p);
}

/* Opens the fault program; caller destroys plugin and context. */
static void s_open_fault(const fitfarm_plugin_t **p, void **ctx)
{
    char spec[2048], err[1024];
    fitfarm_plugin_info_t info;
    s_spec(spec, sizeof spec, "fault", "tests/unit/exec_fault.py", NULL);
    assert_int_equal(worker_exec_plugin_new(spec, p, err, sizeof err), 0);
    assert_int_equal((*p)->flags & FITFARM_PLUGIN_DETERMINISTIC, 0);
    assert_int_equal((*p)->create("{}", ctx, &info, err, sizeof err), FITFARM_PLUGIN_OK);
}

static void s_close_fault(const fitfarm_plugin_t **p, void *ctx)
{
    (*p)->destroy(ctx);
    worker_exec_plugin_destroy(p);
}

/* Evaluates the good request [0, x] and returns the co-process pid it reported. */
static long s_good(const fitfarm_plugin_t *p, void *ctx, double x)
{
    char err[1024];
    double g[2] = {0, x}, fit[2] = {-1, -1};
    assert_int_equal(s_eval(p, ctx, g, 2, 1, fit, err, sizeof err), FITFARM_PLUGIN_OK);
    assert_true(fit[0] == x);
    assert_int_equal((long)fit[1], worker_exec_plugin_coprocess_pid(p));
    return (long)fit[1];
}

/* Asserts that request [what] fails with status and a message holding each
 * of the given phrases, and returns whether the co-process was restarted. */
static void s_expect(const fitfarm_plugin_t *p, void *ctx, double what, int status,
                     const char *phrase1, const char *phrase2)
{
    char err[1024];
    double g[1] = {what}, fit[2];
    assert_int_equal(s_eval(p, ctx, g, 1, 1, fit, err, sizeof err), status);
    if (!strstr(err, phrase1) || (phrase2 && !strstr(err, phrase2)))
        fail_msg("message '%s' lacks '%s' / '%s'", err, phrase1, phrase2 ? phrase2 : "");
}

static void test_crash_then_restart(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p;
    void *ctx;
    s_open_fault(&p, &ctx);
    long pid1 = s_good(p, ctx, 0.25);
    s_expect(p, ctx, 1, FITFARM_PLUGIN_EFAIL, "ended its output before answering",
             "exited with status 3");
    assert_int_equal(worker_exec_plugin_coprocess_pid(p), 0);
    assert_false(s_alive(pid1));
    long pid2 = s_good(p, ctx, 0.75);
    assert_true(pid2 != pid1);
    /* Killed by a signal: named. */
    s_expect(p, ctx, 10, FITFARM_PLUGIN_EFAIL, "killed by signal 11", NULL);
    assert_false(s_alive(pid2));
    assert_true(s_good(p, ctx, 0.5) != pid2);
    s_close_fault(&p, ctx);
}

static void test_garbage_and_oversize(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p;
    void *ctx;
    s_open_fault(&p, &ctx);
    long pid = s_good(p, ctx, 0.5);
    s_expect(p, ctx, 2, FITFARM_PLUGIN_EFAIL, "answer is not JSON", "'this is not json'");
    assert_false(s_alive(pid));
    pid = s_good(p, ctx, 0.5);
    s_expect(p, ctx, 5, FITFARM_PLUGIN_EFAIL, "longer than the limit of 1048576 bytes", NULL);
    assert_false(s_alive(pid));
    pid = s_good(p, ctx, 0.5);
    s_expect(p, ctx, 4, FITFARM_PLUGIN_EFAIL, "has 1 numbers",
             "introduced itself with 2 objectives");
    assert_false(s_alive(pid));
    pid = s_good(p, ctx, 0.5);
    s_expect(p, ctx, 6, FITFARM_PLUGIN_EFAIL, "fitness[1] is a string, not a number", NULL);
    assert_false(s_alive(pid));
    s_good(p, ctx, 0.5);
    s_close_fault(&p, ctx);
}

static void test_error_and_invalid_keep_the_program(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p;
    void *ctx;
    s_open_fault(&p, &ctx);
    long pid = s_good(p, ctx, 0.5);
    s_expect(p, ctx, 7, FITFARM_PLUGIN_EFAIL, "simulated failure", NULL);
    s_expect(p, ctx, 8, FITFARM_PLUGIN_EINVAL, "gene out of range", NULL);
    /* Answers in protocol: the same program goes on. */
    assert_int_equal(s_good(p, ctx, 0.5), pid);
    s_close_fault(&p, ctx);
}

static void test_hang_times_out(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p;
    void *ctx;
    s_open_fault(&p, &ctx);
    worker_exec_plugin_set_answer_timeout(p, 500);
    long pid = s_good(p, ctx, 0.5);
    s_expect(p, ctx, 3, FITFARM_PLUGIN_EFAIL, "did not answer within 500 ms", NULL);
    assert_false(s_alive(pid));
    assert_true(s_good(p, ctx, 0.5) != pid);
    s_close_fault(&p, ctx);
}

static void test_extra_line_restarts(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p;
    void *ctx;
    char err[1024];
    double g[1] = {9}, fit[2];
    s_open_fault(&p, &ctx);
    assert_int_equal(s_eval(p, ctx, g, 1, 1, fit, err, sizeof err), FITFARM_PLUGIN_OK);
    long pid = (long)fit[1];
    usleep(100 * 1000); /* let the extra line arrive */
    /* The next request must not read the stale line as its answer. */
    long pid2 = s_good(p, ctx, 0.125);
    assert_true(pid2 != pid);
    s_close_fault(&p, ctx);
}

static void test_seed_and_params_reach_the_program(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p;
    void *ctx;
    char err[1024];
    fitfarm_plugin_info_t info;
    s_open_fault(&p, &ctx);
    p->destroy(ctx);
    assert_int_equal(
        p->create("{\"b\": 1, \"a\": [1, 2], \"c\": \"x\\ny\"}", &ctx, &info, err, sizeof err),
        FITFARM_PLUGIN_OK);
    double g[1] = {11}, fit[2];
    /* All 64 bits of the seed arrive: JSON numbers would lose those above 2^53. */
    uint64_t seed = UINT64_MAX;
    assert_int_equal(s_eval(p, ctx, g, 1, seed, fit, err, sizeof err), FITFARM_PLUGIN_OK);
    assert_true(fit[0] == (double)(seed % 1000003u));
    assert_true(fit[1] == 3.0);
    seed = (UINT64_C(1) << 53) + 1;
    assert_int_equal(s_eval(p, ctx, g, 1, seed, fit, err, sizeof err), FITFARM_PLUGIN_OK);
    assert_true(fit[0] == (double)(seed % 1000003u));
    s_close_fault(&p, ctx);
}

static void s_expect_new_fails(const char *spec, const char *phrase)
{
    char err[1024] = "";
    const fitfarm_plugin_t *p = (const fitfarm_plugin_t *)1;
    assert_int_equal(worker_exec_plugin_new(spec, &p, err, sizeof err), -1);
    assert_null(p);
    if (!strstr(err, phrase))
        fail_msg("spec '%s': message '%s' lacks '%s'", spec, err, phrase);
}

static void test_bad_introductions_refused(void **state)
{
    (void)state;
    static const struct {
        const char *mode, *phrase;
    } cases[] = {
        {"garbage", "introduction is not JSON"},
        {"exit", "exited with status 3 before introducing itself"},
        {"objectives0", "declares 0 objectives; 1 to 64 are allowed"},
        {"version2", "other than 1"},
        {"unknownkey", "unknown key \"colour\""},
        {"long", "introduction line is longer than 1048576 bytes"},
        {"missing", "has no \"version\""},
    };
    char spec[2048];
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        s_spec(spec, sizeof spec, "fault", "tests/unit/exec_fault.py", cases[i].mode);
        s_expect_new_fails(spec, cases[i].phrase);
    }
}

static void test_silent_program_times_out(void **state)
{
    (void)state;
    char spec[2048];
    s_spec(spec, sizeof spec, "fault", "tests/unit/exec_fault.py", "silent");
    s_expect_new_fails(spec, "no introduction line within 10000 ms");
}

static void test_bad_specs_refused(void **state)
{
    (void)state;
    s_expect_new_fails("cantilever", "is not NAME=COMMAND");
    s_expect_new_fails("Cantilever=python3", "must be 1 to 127 characters of a-z");
    s_expect_new_fails("=python3", "must be 1 to 127 characters");
    s_expect_new_fails("x=   ", "the command is empty");
    s_expect_new_fails("x=/nonexistent/simulator", "'/nonexistent/simulator' is not an executable");
    s_expect_new_fails("x=no-such-simulator-here", "'no-such-simulator-here' is not found on PATH");
    s_expect_new_fails("x=python3 'half", "unterminated ' quote");
    s_expect_new_fails("x=/etc/passwd", "not an executable");
    /* Runs, but is not a protocol program: /bin/true exits at once. */
    s_expect_new_fails("x=/bin/true", "exited with status 0 before introducing itself");

    char spec[2048], err[1024];
    const fitfarm_plugin_t *p = NULL;
    s_spec(spec, sizeof spec, "twice", "tests/unit/exec_fault.py", NULL);
    assert_int_equal(worker_exec_plugin_new(spec, &p, err, sizeof err), 0);
    s_expect_new_fails(spec, "configured twice");
    worker_exec_plugin_destroy(&p);
    worker_exec_plugin_destroy(&p); /* NULL: no-op */
}

static void test_split_command(void **state)
{
    (void)state;
    char **argv = NULL, err[256];
    assert_int_equal(worker_exec_protocol_split_command(
                         "  sim  'a b' \"c \\\" d\" e\\ f g'h'\"i\"  ", &argv, err, sizeof err),
                     0);
    const char *want[] = {"sim", "a b", "c \" d", "e f", "ghi"};
    for (size_t i = 0; i < 5; i++)
        assert_string_equal(argv[i], want[i]);
    assert_null(argv[5]);
    worker_exec_protocol_argv_free(argv);
    assert_int_equal(worker_exec_protocol_split_command("a \"b", &argv, err, sizeof err), -1);
    assert_non_null(strstr(err, "unterminated \" quote"));
    assert_int_equal(worker_exec_protocol_split_command("a b\\", &argv, err, sizeof err), -1);
    assert_non_null(strstr(err, "lone backslash"));
}

static void test_request_encoding_round_trips(void **state)
{
    (void)state;
    /* 17 significant digits give back the same double (IEEE 754-2008 5.12.2). */
    double genes[4] = {0.1, -0.0, 1.0 / 3.0, 1e-310};
    uint8_t g[32];
    char *buf = NULL, err[256];
    size_t cap = 0, len = 0;
    s_genome(genes, 4, g);
    assert_int_equal(
        worker_exec_protocol_request_encode(g, 32, 42, "{}", &buf, &cap, &len, err, sizeof err), 0);
    assert_int_equal(buf[len - 1], '\n');
    assert_null(memchr(buf, '\n', len - 1));
    const char *p = strchr(buf, '[') + 1;
    for (int i = 0; i < 4; i++) {
        char *end;
        double v = strtod(p, &end);
        assert_memory_equal(&v, &genes[i], sizeof v);
        p = end + 1;
    }
    assert_non_null(strstr(buf, "\"seed\":\"42\",\"params\":{}}"));
    free(buf);
}

/* A worker child killed by its parent (the per-evaluation time-out) takes the
 * co-process with it; a forked child never uses its parent's co-process. */
static void test_coprocess_dies_with_its_child(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p;
    void *ctx;
    int fds[2];
    s_open_fault(&p, &ctx);
    long parent_pid = s_good(p, ctx, 0.5);
    assert_int_equal(pipe(fds), 0);
    pid_t child = fork();
    assert_true(child >= 0);
    if (child == 0) {
        char err[256];
        double g0[2] = {0, 0.5}, g3[1] = {3}, fit[2];
        close(fds[0]);
        if (s_eval(p, ctx, g0, 2, 1, fit, err, sizeof err) != FITFARM_PLUGIN_OK)
            _exit(2);
        long mine = (long)fit[1];
        if (write(fds[1], &mine, sizeof mine) != (ssize_t)sizeof mine)
            _exit(3);
        s_eval(p, ctx, g3, 1, 1, fit, err, sizeof err); /* hangs */
        _exit(4);
    }
    close(fds[1]);
    long cop = 0;
    assert_int_equal(read(fds[0], &cop, sizeof cop), (ssize_t)sizeof cop);
    close(fds[0]);
    assert_true(cop > 0 && cop != parent_pid);
    usleep(100 * 1000); /* the hanging request is in flight */
    assert_true(s_alive(cop));
    assert_int_equal(kill(child, SIGKILL), 0);
    int st;
    assert_int_equal(waitpid(child, &st, 0), child);
    int alive = 1;
    for (int i = 0; i < 200 && alive; i++) {
        usleep(10 * 1000);
        alive = s_alive(cop);
    }
    assert_false(alive);
    /* The parent's co-process was not disturbed. */
    assert_int_equal(s_good(p, ctx, 0.5), parent_pid);
    s_close_fault(&p, ctx);
    assert_false(s_alive(parent_pid));
}

/* Two exec plugins at once: each descriptor's create reaches its own program. */
static void test_two_plugins(void **state)
{
    (void)state;
    char spec[2048], err[1024];
    const fitfarm_plugin_t *fault, *cant = NULL;
    void *fctx, *cctx;
    fitfarm_plugin_info_t info;
    s_open_fault(&fault, &fctx);
    s_spec(spec, sizeof spec, "cantilever", "client/examples/cantilever.py", NULL);
    assert_int_equal(worker_exec_plugin_new(spec, &cant, err, sizeof err), 0);
    assert_int_equal(cant->create("{}", &cctx, &info, err, sizeof err), FITFARM_PLUGIN_OK);
    double g[1] = {1.0}, fit[2];
    assert_int_equal(s_eval(cant, cctx, g, 1, 1, fit, err, sizeof err), FITFARM_PLUGIN_OK);
    double want = s_uniform_deflection(1000.0, 1.0, 200e9, 0.02, 0.05);
    assert_true(fabs(fit[0] - want) <= 1e-12 * want);
    s_good(fault, fctx, 0.5);
    cant->destroy(cctx);
    worker_exec_plugin_destroy(&cant);
    s_close_fault(&fault, fctx);
}

static void test_changed_program_refused(void **state)
{
    (void)state;
    char spec[2048], err[1024], marker[] = "/tmp/fitfarm-exec-markerXXXXXX";
    int fd = mkstemp(marker);
    assert_true(fd >= 0);
    close(fd);
    unlink(marker);
    char args[256];
    snprintf(args, sizeof args, "mismatch %s", marker);
    s_spec(spec, sizeof spec, "fault", "tests/unit/exec_fault.py", args);
    const fitfarm_plugin_t *p = NULL;
    void *ctx;
    fitfarm_plugin_info_t info;
    assert_int_equal(worker_exec_plugin_new(spec, &p, err, sizeof err), 0);
    assert_string_equal(p->version, "1");
    assert_int_equal(p->create("{}", &ctx, &info, err, sizeof err), FITFARM_PLUGIN_OK);
    s_expect(p, ctx, 0, FITFARM_PLUGIN_EFAIL, "introduction changed", "now '2'");
    assert_int_equal(worker_exec_plugin_coprocess_pid(p), 0);
    p->destroy(ctx);
    worker_exec_plugin_destroy(&p);
    unlink(marker);
}

int main(void)
{
    s_setup_env();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_cantilever),
        cmocka_unit_test(test_cantilever_reference_script),
        cmocka_unit_test(test_digest),
        cmocka_unit_test(test_crash_then_restart),
        cmocka_unit_test(test_garbage_and_oversize),
        cmocka_unit_test(test_error_and_invalid_keep_the_program),
        cmocka_unit_test(test_hang_times_out),
        cmocka_unit_test(test_extra_line_restarts),
        cmocka_unit_test(test_seed_and_params_reach_the_program),
        cmocka_unit_test(test_bad_introductions_refused),
        cmocka_unit_test(test_silent_program_times_out),
        cmocka_unit_test(test_bad_specs_refused),
        cmocka_unit_test(test_split_command),
        cmocka_unit_test(test_request_encoding_round_trips),
        cmocka_unit_test(test_coprocess_dies_with_its_child),
        cmocka_unit_test(test_two_plugins),
        cmocka_unit_test(test_changed_program_refused),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
