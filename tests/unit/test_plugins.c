/* test_plugins.c: the bundled benchmark plugins against independent values.
 *
 * Each plugin is dlopened from $FITFARM_BUILD_DIR/plugins exactly as the
 * worker loads it, evaluated on a few hundred random genomes, and compared bit
 * for bit or to 1e-12 relative with values computed in Python from the
 * published definitions (tests/unit/ref_benchmarks.py, run with $PYTHON):
 *   ZDT1/2/3 - Zitzler, Deb, Thiele, Evolutionary Computation 8(2), 2000;
 *   DTLZ2    - Deb, Thiele, Laumanns, Zitzler, "Scalable Test Problems for
 *              Evolutionary Multi-Objective Optimization", 2002;
 *   Rastrigin and sphere - their textbook definitions;
 *   spin's u - xoshiro256** seeded by splitmix64 (Blackman & Vigna), the
 *              Python side checked against the authors' published outputs. */
#include <dlfcn.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <cmocka.h>

#include "fitfarm_plugin.h"
#include "fitfarm_rng.h"

#define S_MAX_HANDLES 16
static void *s_handles[S_MAX_HANDLES];
static size_t s_n_handles;

/* dlopens build/plugins/NAME.so and returns its descriptor (checked). */
static const fitfarm_plugin_t *s_load(const char *name)
{
    const char *build = getenv("FITFARM_BUILD_DIR");
    assert_non_null(build);
    char path[4096];
    snprintf(path, sizeof path, "%s/plugins/%s.so", build, name);
    void *dl = dlopen(path, RTLD_NOW | RTLD_LOCAL);
    if (!dl)
        fail_msg("dlopen %s: %s", path, dlerror());
    assert_true(s_n_handles < S_MAX_HANDLES);
    s_handles[s_n_handles++] = dl;
    void *sym = dlsym(dl, FITFARM_PLUGIN_SYMBOL);
    assert_non_null(sym);
    const fitfarm_plugin_t *(*entry)(void);
    memcpy(&entry, &sym, sizeof entry);
    const fitfarm_plugin_t *p = entry();
    assert_non_null(p);
    assert_int_equal(p->abi_version, FITFARM_PLUGIN_ABI);
    assert_string_equal(p->name, name);
    return p;
}

static int s_teardown(void **state)
{
    (void)state;
    for (size_t i = 0; i < s_n_handles; i++)
        dlclose(s_handles[i]);
    s_n_handles = 0;
    return 0;
}

static void s_put_f64(uint8_t *genome, size_t i, double x)
{
    uint64_t bits;
    memcpy(&bits, &x, sizeof bits);
    for (int b = 0; b < 8; b++)
        genome[i * 8 + (size_t)b] = (uint8_t)(bits >> (8 * b));
}

static uint64_t s_bits(double x)
{
    uint64_t b;
    memcpy(&b, &x, sizeof b);
    return b;
}

/* One evaluation to check against the reference. */
typedef struct {
    char line[16384]; /* the reference's input line */
    double f[8];
    unsigned nf;
} s_case_t;

typedef struct {
    s_case_t *cases;
    size_t n, cap;
} s_cases_t;

static s_case_t *s_case_new(s_cases_t *cs)
{
    if (cs->n == cs->cap) {
        cs->cap = cs->cap ? cs->cap * 2 : 256;
        cs->cases = realloc(cs->cases, cs->cap * sizeof *cs->cases);
        assert_non_null(cs->cases);
    }
    s_case_t *c = &cs->cases[cs->n++];
    memset(c, 0, sizeof *c);
    return c;
}

/* Evaluates plugin (params) on x[0..n) and records the case with the
 * reference's line prefix (e.g. "zdt1" or "dtlz2 3"). */
static void s_eval_case(s_cases_t *cs, const fitfarm_plugin_t *p, void *ctx, unsigned nf,
                        const char *prefix, const double *x, size_t n)
{
    uint8_t *genome = malloc(n * 8);
    assert_non_null(genome);
    s_case_t *c = s_case_new(cs);
    size_t used = (size_t)snprintf(c->line, sizeof c->line, "%s", prefix);
    for (size_t i = 0; i < n; i++) {
        s_put_f64(genome, i, x[i]);
        used += (size_t)snprintf(c->line + used, sizeof c->line - used, " %016llx",
                                 (unsigned long long)s_bits(x[i]));
    }
    assert_true(used + 2 < sizeof c->line);
    char err[512] = "";
    int rc = p->evaluate(ctx, genome, n * 8, 12345, c->f, err, sizeof err);
    if (rc != FITFARM_PLUGIN_OK)
        fail_msg("%s: evaluate failed: %s", prefix, err);
    c->nf = nf;
    free(genome);
}

/* Runs the Python reference over every case and compares. */
static void s_compare(const s_cases_t *cs)
{
    const char *python = getenv("PYTHON");
    const char *src = getenv("FITFARM_SOURCE_DIR");
    assert_non_null(python);
    assert_non_null(src);
    char in_path[] = "/tmp/fitfarm-ref-XXXXXX";
    int fd = mkstemp(in_path);
    assert_true(fd >= 0);
    FILE *in = fdopen(fd, "w");
    assert_non_null(in);
    for (size_t i = 0; i < cs->n; i++)
        fprintf(in, "%s\n", cs->cases[i].line);
    fclose(in);
    char cmd[8192];
    snprintf(cmd, sizeof cmd, "'%s' '%s/tests/unit/ref_benchmarks.py' < '%s'", python, src,
             in_path);
    FILE *out = popen(cmd, "r");
    assert_non_null(out);
    char line[4096];
    size_t i = 0, exact = 0;
    while (fgets(line, sizeof line, out)) {
        assert_true(i < cs->n);
        const s_case_t *c = &cs->cases[i];
        char *p = line;
        for (unsigned k = 0; k < c->nf; k++) {
            char *end = NULL;
            unsigned long long bits = strtoull(p, &end, 16);
            assert_true(end != p);
            p = end;
            double ref;
            memcpy(&ref, &bits, sizeof ref);
            double got = c->f[k];
            if (s_bits(got) == bits) {
                exact++;
                continue;
            }
            double tol = 1e-12 * fmax(fabs(ref), fabs(got));
            if (!(fabs(got - ref) <= tol))
                fail_msg("%.40s...: objective %u is %.17g, reference %.17g", c->line, k, got,
                         ref);
        }
        i++;
    }
    int st = pclose(out);
    unlink(in_path);
    assert_int_equal(st, 0);
    assert_int_equal(i, cs->n); /* the reference answered every case */
    assert_true(exact > 0);
}

static void *s_create(const fitfarm_plugin_t *p, const char *params, fitfarm_plugin_info_t *info)
{
    void *ctx = NULL;
    char err[512] = "";
    int rc = p->create(params, &ctx, info, err, sizeof err);
    if (rc != FITFARM_PLUGIN_OK)
        fail_msg("%s create(%s): %s", p->name, params, err);
    return ctx;
}

/* Usage: load a plugin, make a context from params, evaluate one genome. */
static void test_usage_example(void **state)
{
    (void)state;
    const fitfarm_plugin_t *zdt1 = s_load("zdt1");
    assert_true(zdt1->flags & FITFARM_PLUGIN_DETERMINISTIC);
    fitfarm_plugin_info_t info = {0};
    void *ctx = s_create(zdt1, "{\"n\":3}", &info);
    assert_int_equal(info.objectives, 2);
    assert_int_equal(info.genome_bytes, 24);
    uint8_t genome[24];
    s_put_f64(genome, 0, 0.25);
    s_put_f64(genome, 1, 0.0);
    s_put_f64(genome, 2, 0.0);
    double f[2];
    char err[256];
    assert_int_equal(zdt1->evaluate(ctx, genome, sizeof genome, 0, f, err, sizeof err),
                     FITFARM_PLUGIN_OK);
    /* On the front (g = 1): f1 = x1, f2 = 1 - sqrt(f1) (ZDT paper, 2000). */
    assert_true(f[0] == 0.25);
    assert_true(f[1] == 0.5);
    zdt1->destroy(ctx);
}

static void test_zdt_against_reference(void **state)
{
    (void)state;
    s_cases_t cs = {0};
    fitfarm_rng_t rng;
    fitfarm_rng_seed(&rng, 2000);
    const char *names[] = {"zdt1", "zdt2", "zdt3"};
    for (int v = 0; v < 3; v++) {
        const fitfarm_plugin_t *p = s_load(names[v]);
        fitfarm_plugin_info_t info = {0};
        void *ctx = s_create(p, "{}", &info); /* n defaults to 30, as in the paper */
        assert_int_equal(info.genome_bytes, 30 * 8);
        double x[30];
        for (int k = 0; k < 200; k++) {
            for (int i = 0; i < 30; i++)
                x[i] = fitfarm_rng_uniform(&rng);
            if (k == 0)
                memset(x, 0, sizeof x); /* corner: f1 = 0, g = 1 */
            if (k == 1)
                for (int i = 0; i < 30; i++)
                    x[i] = 1.0; /* corner: every variable at its upper bound */
            s_eval_case(&cs, p, ctx, 2, names[v], x, 30);
        }
        p->destroy(ctx);
        /* A smaller n through params. */
        ctx = s_create(p, "{\"n\":7}", &info);
        for (int k = 0; k < 50; k++) {
            for (int i = 0; i < 7; i++)
                x[i] = fitfarm_rng_uniform(&rng);
            s_eval_case(&cs, p, ctx, 2, names[v], x, 7);
        }
        p->destroy(ctx);
    }
    s_compare(&cs);
    free(cs.cases);
}

static void test_dtlz2_against_reference(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p = s_load("dtlz2");
    s_cases_t cs = {0};
    fitfarm_rng_t rng;
    fitfarm_rng_seed(&rng, 2002);
    const struct {
        const char *params, *prefix;
        unsigned m, k;
    } shapes[] = {{"{}", "dtlz2 3", 3, 10}, {"{\"k\":5,\"m\":5}", "dtlz2 5", 5, 5},
                  {"{\"k\":1,\"m\":2}", "dtlz2 2", 2, 1}};
    for (size_t s = 0; s < 3; s++) {
        fitfarm_plugin_info_t info = {0};
        void *ctx = s_create(p, shapes[s].params, &info);
        unsigned m = shapes[s].m, n = m + shapes[s].k - 1;
        assert_int_equal(info.objectives, m);
        assert_int_equal(info.genome_bytes, n * 8);
        double x[64];
        for (int k = 0; k < 150; k++) {
            for (unsigned i = 0; i < n; i++)
                x[i] = fitfarm_rng_uniform(&rng);
            s_eval_case(&cs, p, ctx, m, shapes[s].prefix, x, n);
        }
        /* On the front: distance variables at 0.5 give g = 0, and the paper
         * shows the front is the unit sphere, sum f_m^2 = 1. */
        for (int k = 0; k < 50; k++) {
            for (unsigned i = 0; i < n; i++)
                x[i] = i + 1 < m ? fitfarm_rng_uniform(&rng) : 0.5;
            s_eval_case(&cs, p, ctx, m, shapes[s].prefix, x, n);
            const double *f = cs.cases[cs.n - 1].f;
            double sum = 0.0;
            for (unsigned j = 0; j < m; j++) {
                assert_true(f[j] >= 0.0);
                sum += f[j] * f[j];
            }
            assert_true(fabs(sum - 1.0) <= 1e-12);
        }
        p->destroy(ctx);
    }
    s_compare(&cs);
    free(cs.cases);
}

static void test_single_objective_against_reference(void **state)
{
    (void)state;
    s_cases_t cs = {0};
    fitfarm_rng_t rng;
    fitfarm_rng_seed(&rng, 7);
    const char *names[] = {"rastrigin", "sphere"};
    const double half[] = {5.12, 10.0};
    for (int v = 0; v < 2; v++) {
        const fitfarm_plugin_t *p = s_load(names[v]);
        assert_int_equal(p->objectives, 1);
        fitfarm_plugin_info_t info = {0};
        void *ctx = s_create(p, "{}", &info);
        assert_int_equal(info.genome_bytes, 0); /* any length without "n" */
        double x[20];
        for (int k = 0; k < 200; k++) {
            size_t n = 1 + (size_t)(fitfarm_rng_next(&rng) % 20);
            for (size_t i = 0; i < n; i++)
                x[i] = (2.0 * fitfarm_rng_uniform(&rng) - 1.0) * half[v];
            s_eval_case(&cs, p, ctx, 1, names[v], x, n);
        }
        /* Minimum 0 at the origin, exactly. */
        memset(x, 0, sizeof x);
        s_eval_case(&cs, p, ctx, 1, names[v], x, 20);
        assert_true(cs.cases[cs.n - 1].f[0] == 0.0);
        p->destroy(ctx);
    }
    s_compare(&cs);
    free(cs.cases);
}

static double s_cpu_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static void test_spin(void **state)
{
    (void)state;
    const fitfarm_plugin_t *p = s_load("spin");
    assert_false(p->flags & FITFARM_PLUGIN_DETERMINISTIC);
    fitfarm_plugin_info_t info = {0};
    void *ctx = s_create(p, "{\"ms\":20}", &info);
    assert_int_equal(info.objectives, 2);
    uint8_t genome[24];
    s_put_f64(genome, 0, 0.5);
    s_put_f64(genome, 1, 1.25);
    s_put_f64(genome, 2, -0.75);
    char err[256];
    double a[2], b[2], c[2];
    double cpu0 = s_cpu_now();
    assert_int_equal(p->evaluate(ctx, genome, 24, 99, a, err, sizeof err), FITFARM_PLUGIN_OK);
    double burned = s_cpu_now() - cpu0;
    assert_true(burned >= 0.020); /* burns at least the CPU time it was asked to */
    assert_int_equal(p->evaluate(ctx, genome, 24, 99, b, err, sizeof err), FITFARM_PLUGIN_OK);
    assert_int_equal(p->evaluate(ctx, genome, 24, 100, c, err, sizeof err), FITFARM_PLUGIN_OK);
    assert_true(a[0] == 1.0); /* 0.5 + 1.25 - 0.75, exact in binary */
    assert_true(s_bits(a[1]) == s_bits(b[1])); /* same seed, same bits */
    assert_true(s_bits(a[1]) != s_bits(c[1])); /* another seed, another draw */
    p->destroy(ctx);

    /* u against the reference generator, over many seeds, in [0, 1). */
    ctx = s_create(p, "{\"ms\":0}", &info);
    s_cases_t cs = {0};
    for (uint64_t seed = 0; seed < 64; seed++) {
        uint64_t sd = seed * 0x9e3779b97f4a7c15ULL;
        s_case_t *k = s_case_new(&cs);
        snprintf(k->line, sizeof k->line, "spin %llu", (unsigned long long)sd);
        double f[2];
        assert_int_equal(p->evaluate(ctx, genome, 0, sd, f, err, sizeof err), FITFARM_PLUGIN_OK);
        assert_true(f[0] == 0.0);
        assert_true(f[1] >= 0.0 && f[1] < 1.0);
        k->f[0] = f[1];
        k->nf = 1;
    }
    p->destroy(ctx);
    s_compare(&cs);
    free(cs.cases);
}

/* Bad genomes and params: EINVAL with a sentence that names the problem. */
static void test_invalid_inputs(void **state)
{
    (void)state;
    const fitfarm_plugin_t *zdt1 = s_load("zdt1");
    fitfarm_plugin_info_t info = {0};
    void *ctx = s_create(zdt1, "{}", &info);
    uint8_t genome[31 * 8] = {0};
    double f[8];
    char err[512];

    err[0] = '\0';
    assert_int_equal(zdt1->evaluate(ctx, genome, 29 * 8, 0, f, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "29 doubles, expected 30"));

    s_put_f64(genome, 3, 1.5);
    err[0] = '\0';
    assert_int_equal(zdt1->evaluate(ctx, genome, 30 * 8, 0, f, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "x[3] = 1.5"));

    s_put_f64(genome, 3, NAN);
    err[0] = '\0';
    assert_int_equal(zdt1->evaluate(ctx, genome, 30 * 8, 0, f, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "x[3]"));
    zdt1->destroy(ctx);

    /* Params: unknown key, wrong type, out of range. */
    void *bad = NULL;
    err[0] = '\0';
    assert_int_equal(zdt1->create("{\"dims\":30}", &bad, &info, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "unknown parameter \"dims\""));
    err[0] = '\0';
    assert_int_equal(zdt1->create("{\"n\":\"30\"}", &bad, &info, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "\"n\" must be an integer"));
    err[0] = '\0';
    assert_int_equal(zdt1->create("{\"n\":1}", &bad, &info, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "\"n\" is 1"));

    const fitfarm_plugin_t *dtlz2 = s_load("dtlz2");
    err[0] = '\0';
    assert_int_equal(dtlz2->create("{\"m\":65}", &bad, &info, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "\"m\" is 65"));
    ctx = s_create(dtlz2, "{}", &info);
    memset(genome, 0, sizeof genome);
    s_put_f64(genome, 11, -0.1);
    err[0] = '\0';
    assert_int_equal(dtlz2->evaluate(ctx, genome, 12 * 8, 0, f, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "x[11] = -0.1"));
    dtlz2->destroy(ctx);

    const fitfarm_plugin_t *ras = s_load("rastrigin");
    ctx = s_create(ras, "{}", &info);
    err[0] = '\0';
    assert_int_equal(ras->evaluate(ctx, genome, 0, 0, f, err, sizeof err), FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "at least 1"));
    err[0] = '\0';
    assert_int_equal(ras->evaluate(ctx, genome, 12, 0, f, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "12 bytes"));
    ras->destroy(ctx);
    ctx = s_create(ras, "{\"n\":4}", &info);
    assert_int_equal(info.genome_bytes, 32);
    err[0] = '\0';
    assert_int_equal(ras->evaluate(ctx, genome, 40, 0, f, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "5 doubles, expected 4"));
    ras->destroy(ctx);

    const fitfarm_plugin_t *spin = s_load("spin");
    err[0] = '\0';
    assert_int_equal(spin->create("{\"ms\":-1}", &bad, &info, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "\"ms\" is -1"));
    err[0] = '\0';
    assert_int_equal(spin->create("[1]", &bad, &info, err, sizeof err), FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "JSON object"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_teardown(test_usage_example, s_teardown),
        cmocka_unit_test_teardown(test_zdt_against_reference, s_teardown),
        cmocka_unit_test_teardown(test_dtlz2_against_reference, s_teardown),
        cmocka_unit_test_teardown(test_single_objective_against_reference, s_teardown),
        cmocka_unit_test_teardown(test_spin, s_teardown),
        cmocka_unit_test_teardown(test_invalid_inputs, s_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
