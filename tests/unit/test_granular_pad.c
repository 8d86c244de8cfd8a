/* test_granular_pad.c: the granular plugin's "pad" scenario (worker/plugins/
 * granular/pad.c), its params, and the plugin as the worker sees it
 * (granular.so from the build tree, through the ABI and the optional trace
 * entry point). Checks: results are finite and bit-identical for one seed,
 * differ across seeds when there is scatter and not when there is none;
 * settlement matches Hooke's law for springs in series on a single row (an
 * outside reference: the elementary statics of linear springs) and is larger
 * for soft grains than for stiff ones; a wrong genome length fails with
 * EINVAL naming the expected count; bad params name the key. */
#include <dlfcn.h>
#include <jansson.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

#include "fitfarm_plugin.h"
#include "worker/plugins/granular/pad.h"
#include "worker/plugins/granular/params.h"

/* Quick params for most checks: a 3x6 pad, short phases. */
#define S_QUICK                                                                                    \
    "{\"rows\":3,\"columns\":6,\"settle_time\":0.05,\"transient_time\":0.03,"                      \
    "\"measure_time\":0.03,\"frequencies\":[40,120]"

static int s_run(const char *json, double fill, uint64_t seed, granular_pad_result_t *res,
                 char *err, size_t errlen)
{
    granular_params_t p;
    if (granular_params_parse(json, &p, err, errlen) < 0)
        return -1;
    size_t n = (size_t)p.rows * (size_t)p.columns;
    double *genes = malloc(n * sizeof *genes);
    assert_non_null(genes);
    for (size_t i = 0; i < n; i++)
        genes[i] = fill >= 0.0 ? fill : (double)(i % 2);
    int rc = granular_pad_run(&p, genes, n, seed, NULL, res, err, errlen);
    free(genes);
    return rc;
}

/* Usage example: parse params, run one pad with a genome, read the two
 * objectives (transmissibility in dB, settlement in mm; both minimised). */
static void test_default_pad_gives_finite_objectives(void **state)
{
    (void)state;
    granular_params_t p;
    char err[256];
    assert_int_equal(granular_params_parse("{}", &p, err, sizeof err), 0);
    size_t n = (size_t)p.rows * (size_t)p.columns; /* 6 x 12 = 72 genes */
    assert_int_equal(n, 72);
    double genes[72];
    for (size_t i = 0; i < n; i++)
        genes[i] = (i % 3 == 0) ? 0.8 : 0.2; /* a third stiff */
    granular_pad_result_t res;
    assert_int_equal(granular_pad_run(&p, genes, n, 42, NULL, &res, err, sizeof err), 0);
    assert_true(isfinite(res.fitness[0]));
    assert_true(res.fitness[1] > 0.0 && res.fitness[1] < 10.0); /* mm */
    for (size_t f = 0; f < p.frequency_count; f++)
        assert_true(res.transmissibility[f] > 0.0 && isfinite(res.transmissibility[f]));
    assert_true(fabs(res.stiff_share - 24.0 / 72.0) < 1e-15);
}

static void test_same_seed_same_bits_other_seed_other_result(void **state)
{
    (void)state;
    granular_pad_result_t a, b, c;
    char err[256];
    assert_int_equal(s_run(S_QUICK "}", -1.0, 7, &a, err, sizeof err), 0);
    assert_int_equal(s_run(S_QUICK "}", -1.0, 7, &b, err, sizeof err), 0);
    assert_memory_equal(a.fitness, b.fitness, sizeof a.fitness);
    assert_memory_equal(a.transmissibility, b.transmissibility, sizeof a.transmissibility);
    assert_int_equal(s_run(S_QUICK "}", -1.0, 8, &c, err, sizeof err), 0);
    assert_true(a.fitness[0] != c.fitness[0] && a.fitness[1] != c.fitness[1]);
}

static void test_no_scatter_ignores_the_seed(void **state)
{
    (void)state;
    granular_pad_result_t a, b;
    char err[256];
    const char *json = S_QUICK ",\"scatter_radius\":0,\"jitter\":0}";
    assert_int_equal(s_run(json, -1.0, 1, &a, err, sizeof err), 0);
    assert_int_equal(s_run(json, -1.0, 999, &b, err, sizeof err), 0);
    assert_memory_equal(a.fitness, b.fitness, sizeof a.fitness);
}

/* One row of c equal discs, no scatter: each disc is a spring k to the
 * floor in series with a spring k to the plate. Hooke: the plate's weight
 * Mg splits into P = Mg/c per disc; the floor contact carries P + mg, the
 * plate contact P. The unloaded top is 2r - mg/k, the loaded plate sits at
 * 2r - (2P + mg)/k, so the settlement is 2P/k = 2Mg/(c k). */
static void test_single_row_settlement_is_hookes_law(void **state)
{
    (void)state;
    const double M = 0.2, g = 9.81;
    const int c = 8;
    const double ks[] = {3000.0, 30000.0};
    for (int i = 0; i < 2; i++) {
        char json[512];
        snprintf(json, sizeof json,
                 "{\"rows\":1,\"columns\":%d,\"scatter_radius\":0,\"jitter\":0,"
                 "\"k_soft\":%g,\"plate_mass\":%g,\"gravity\":%g,\"frequencies\":[50],"
                 "\"settle_time\":0.2,\"transient_time\":0.01,\"measure_time\":0.02}",
                 c, ks[i], M, g);
        granular_pad_result_t res;
        char err[256];
        assert_int_equal(s_run(json, 0.0, 1, &res, err, sizeof err), 0);
        double ref_mm = 2.0 * M * g / (c * ks[i]) * 1000.0;
        print_message("k %g: settlement %.6g mm, Hooke %.6g mm\n", ks[i], res.fitness[1], ref_mm);
        assert_true(fabs(res.fitness[1] / ref_mm - 1.0) < 0.01);
    }
}

static void test_soft_pad_settles_more_than_stiff(void **state)
{
    (void)state;
    for (uint64_t seed = 1; seed <= 2; seed++) {
        granular_pad_result_t soft, stiff;
        char err[256];
        assert_int_equal(s_run("{}", 0.0, seed, &soft, err, sizeof err), 0);
        assert_int_equal(s_run("{}", 1.0, seed, &stiff, err, sizeof err), 0);
        print_message("seed %d: settlement soft %.4g mm, stiff %.4g mm\n", (int)seed,
                      soft.fitness[1], stiff.fitness[1]);
        assert_true(soft.fitness[1] > stiff.fitness[1]);
    }
}

static void test_graded_and_three_objectives(void **state)
{
    (void)state;
    granular_params_t p;
    char err[256];
    assert_int_equal(granular_params_parse(S_QUICK ",\"materials\":\"graded\",\"objectives\":3}",
                                           &p, err, sizeof err),
                     0);
    assert_int_equal(p.objectives, 3);
    double genes[18];
    for (int i = 0; i < 18; i++)
        genes[i] = 0.25;
    granular_pad_result_t res;
    assert_int_equal(granular_pad_run(&p, genes, 18, 3, NULL, &res, err, sizeof err), 0);
    assert_true(fabs(res.fitness[2] - 0.25) < 1e-15);
    /* Out-of-range genes are clamped to [0, 1]; a NaN is refused. */
    genes[0] = NAN;
    assert_int_equal(granular_pad_run(&p, genes, 18, 3, NULL, &res, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "gene 0"));
}

static void test_wrong_genome_length_names_expected_count(void **state)
{
    (void)state;
    granular_params_t p;
    char err[256] = "";
    assert_int_equal(granular_params_parse("{}", &p, err, sizeof err), 0);
    double genes[71] = {0};
    granular_pad_result_t res;
    assert_int_equal(granular_pad_run(&p, genes, 71, 1, NULL, &res, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "expected 72"));
}

static void test_bad_params_name_the_key(void **state)
{
    (void)state;
    static const struct {
        const char *json, *needle;
    } cases[] = {
        {"{\"rowz\":3}", "rowz"},
        {"{\"rows\":0}", "rows"},
        {"{\"rows\":2.5}", "rows"},
        {"{\"radius\":-1}", "radius"},
        {"{\"damping_ratio\":1}", "damping_ratio"},
        {"{\"damping_ratio\":0.1,\"restitution\":0.5}", "restitution"},
        {"{\"frequencies\":[]}", "frequencies"},
        {"{\"frequencies\":[10,\"x\"]}", "frequencies[1]"},
        {"{\"materials\":\"wood\"}", "materials"},
        {"{\"objectives\":4}", "objectives"},
        {"{\"scenario\":\"heap\"}", "scenario"},
        {"{\"rows\":100,\"columns\":100}", "rows*columns"},
        {"[1,2]", "object"},
        {"{\"rows\":", "JSON"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        granular_params_t p;
        char err[256] = "";
        assert_int_equal(granular_params_parse(cases[i].json, &p, err, sizeof err), -1);
        if (!strstr(err, cases[i].needle))
            fail_msg("params %s: error \"%s\" does not name %s", cases[i].json, err,
                     cases[i].needle);
    }
    /* A time step beyond t_c/10 would be unstable: refused before running. */
    granular_pad_result_t res;
    char err[256] = "";
    assert_int_equal(s_run("{\"dt\":0.001}", 0.0, 1, &res, err, sizeof err), FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "dt"));
    /* restitution e gives zeta = -ln e / sqrt(pi^2 + ln^2 e), the inverse of
     * e = exp(-gamma t_c) (Poeschel & Schwager 2005): e = exp(-pi) <-> 1/sqrt(2). */
    granular_params_t p;
    assert_int_equal(
        granular_params_parse("{\"restitution\":0.04321391826377226}", &p, err, sizeof err), 0);
    assert_true(fabs(p.damping_ratio - M_SQRT1_2) < 1e-12);
}

/* The plugin as the worker loads it. */
static void *s_open_plugin(void)
{
    const char *build = getenv("FITFARM_BUILD_DIR");
    if (!build)
        return NULL;
    char path[4096];
    snprintf(path, sizeof path, "%s/plugins/granular.so", build);
    return dlopen(path, RTLD_NOW | RTLD_LOCAL);
}

static void s_put_f64(uint8_t *out, double v)
{
    uint64_t bits;
    memcpy(&bits, &v, sizeof bits);
    for (int b = 0; b < 8; b++)
        out[b] = (uint8_t)(bits >> (8 * b));
}

static void test_plugin_abi_and_trace(void **state)
{
    (void)state;
    void *so = s_open_plugin();
    if (!so)
        fail_msg("cannot load granular.so from FITFARM_BUILD_DIR/plugins: %s", dlerror());
    const fitfarm_plugin_t *(*entry)(void) =
        (const fitfarm_plugin_t *(*)(void))dlsym(so, FITFARM_PLUGIN_SYMBOL);
    assert_non_null(entry);
    const fitfarm_plugin_t *pl = entry();
    assert_int_equal(pl->abi_version, FITFARM_PLUGIN_ABI);
    assert_string_equal(pl->name, "granular");
    assert_int_equal(pl->flags & FITFARM_PLUGIN_DETERMINISTIC, 0); /* stochastic */

    const char *params = S_QUICK "}";
    void *ctx = NULL;
    fitfarm_plugin_info_t info;
    char err[256] = "";
    assert_int_equal(pl->create(params, &ctx, &info, err, sizeof err), FITFARM_PLUGIN_OK);
    assert_int_equal(info.objectives, 2);
    assert_int_equal(info.genome_bytes, 18 * 8);
    uint8_t genome[18 * 8];
    for (int i = 0; i < 18; i++)
        s_put_f64(genome + 8 * i, i % 2 ? 0.9 : 0.1);
    double fit[3];
    assert_int_equal(pl->evaluate(ctx, genome, sizeof genome, 5, fit, err, sizeof err),
                     FITFARM_PLUGIN_OK);
    assert_int_equal(pl->evaluate(ctx, genome, 17 * 8, 5, fit, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "expected 18"));
    pl->destroy(ctx);
    assert_int_equal(pl->create("{\"bogus\":1}", &ctx, &info, err, sizeof err),
                     FITFARM_PLUGIN_EINVAL);
    assert_non_null(strstr(err, "bogus"));

    fitfarm_plugin_trace_fn trace = (fitfarm_plugin_trace_fn)dlsym(so, FITFARM_PLUGIN_TRACE_SYMBOL);
    assert_non_null(trace);
    char path[] = "/tmp/test_granular_trace_XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    close(fd);
    assert_int_equal(trace(params, genome, sizeof genome, 5, path, err, sizeof err),
                     FITFARM_PLUGIN_OK);
    FILE *f = fopen(path, "r");
    assert_non_null(f);
    char *line = NULL;
    size_t cap = 0;
    int headers = 0, samples = 0, grains = 0, results = 0, lineno = 0;
    while (getline(&line, &cap, f) > 0) {
        json_error_t jerr;
        json_t *obj = json_loads(line, 0, &jerr);
        if (!obj)
            fail_msg("trace line %d is not JSON: %s", lineno + 1, jerr.text);
        const char *type = json_string_value(json_object_get(obj, "type"));
        assert_non_null(type);
        if (strcmp(type, "header") == 0) {
            assert_int_equal(lineno, 0);
            assert_int_equal(json_integer_value(json_object_get(obj, "grains")), 18);
            headers++;
        } else if (strcmp(type, "sample") == 0) {
            samples++;
        } else if (strcmp(type, "grains") == 0) {
            assert_int_equal(json_array_size(json_object_get(obj, "x")), 18);
            grains++;
        } else if (strcmp(type, "result") == 0) {
            /* The trace re-runs the evaluation: the same bits as evaluate(). */
            json_t *fa = json_object_get(obj, "fitness");
            assert_int_equal(json_array_size(fa), 2);
            assert_true(json_real_value(json_array_get(fa, 0)) == fit[0]);
            assert_true(json_real_value(json_array_get(fa, 1)) == fit[1]);
            results++;
        }
        json_decref(obj);
        lineno++;
    }
    free(line);
    fclose(f);
    unlink(path);
    assert_int_equal(headers, 1);
    assert_int_equal(results, 1);
    assert_true(samples > 100 && grains > 3);
    assert_int_equal(trace(params, genome, 3, 5, path, err, sizeof err), FITFARM_PLUGIN_EINVAL);
    dlclose(so);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_default_pad_gives_finite_objectives),
        cmocka_unit_test(test_same_seed_same_bits_other_seed_other_result),
        cmocka_unit_test(test_no_scatter_ignores_the_seed),
        cmocka_unit_test(test_single_row_settlement_is_hookes_law),
        cmocka_unit_test(test_soft_pad_settles_more_than_stiff),
        cmocka_unit_test(test_graded_and_three_objectives),
        cmocka_unit_test(test_wrong_genome_length_names_expected_count),
        cmocka_unit_test(test_bad_params_name_the_key),
        cmocka_unit_test(test_plugin_abi_and_trace),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
