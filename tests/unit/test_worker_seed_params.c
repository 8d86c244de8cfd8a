/* test_worker_seed_params.c: the worker reads a plugin's optional
 * fitfarm_plugin_seed_params and refuses a plugin whose list breaks the rules
 * the ABI header states (at most 16 names, each 1 to 64 characters of
 * [a-z0-9_], no NULL pointer), naming the problem. The plugins are
 * tests/plugins/seedlist.c built once per case. Drives worker/registry.h
 * directly. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "worker/registry.h"

/* Loads seedlist<c>.so into reg; returns worker_registry_load_file's result. */
static int s_load(worker_registry_t *reg, int c, char *err, size_t errlen)
{
    const char *build = getenv("FITFARM_BUILD_DIR");
    assert_non_null(build);
    char path[4096];
    snprintf(path, sizeof path, "%s/test-plugins-seedlist/seedlist%d.so", build, c);
    err[0] = '\0';
    return worker_registry_load_file(reg, path, err, errlen);
}

/* How the worker sees a plugin's seed params after loading it. */
static void test_usage_example(void **state)
{
    (void)state;
    worker_registry_t *reg = worker_registry_new();
    char err[512];
    if (s_load(reg, 0, err, sizeof err) != 0)
        fail_msg("seedlist0 refused: %s", err);
    const worker_plugin_t *p = worker_registry_find(reg, "seedlist0");
    assert_non_null(p);
    assert_int_equal(p->n_seed_params, 2);
    assert_string_equal(p->seed_params[0], "noise");
    assert_string_equal(p->seed_params[1], "drift_2");
    worker_registry_destroy(&reg);
}

static void test_not_exported(void **state)
{
    (void)state;
    worker_registry_t *reg = worker_registry_new();
    char err[512];
    assert_int_equal(s_load(reg, 6, err, sizeof err), 0);
    const worker_plugin_t *p = worker_registry_find(reg, "seedlist6");
    assert_non_null(p);
    assert_int_equal(p->n_seed_params, 0);
    assert_null(p->seed_params);
    worker_registry_destroy(&reg);
}

static void test_refusals(void **state)
{
    (void)state;
    static const struct {
        int c;
        const char *want;
    } cases[] = {
        {1, "more than 16 names"},
        {2, "name 1 is empty"},
        {3, "\"Noise\" has a character outside [a-z0-9_]"},
        {4, "name 0 is too long"},
        {5, "is a NULL pointer"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        worker_registry_t *reg = worker_registry_new();
        char err[512];
        assert_int_equal(s_load(reg, cases[i].c, err, sizeof err), -1);
        if (!strstr(err, cases[i].want) || !strstr(err, "fitfarm_plugin_seed_params"))
            fail_msg("seedlist%d: error \"%s\" does not say \"%s\"", cases[i].c, err,
                     cases[i].want);
        assert_int_equal(worker_registry_count(reg), 0);
        worker_registry_destroy(&reg);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_not_exported),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
