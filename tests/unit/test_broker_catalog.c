/* test_broker_catalog.c: the plugin catalog by name and version
 * (broker/catalog.h) and routing by version through the broker's own SUBMIT
 * and dispatch functions, with the sockets left NULL: a reference resolves
 * to the highest matching version (proto/version.h's order, Debian's), a
 * plain name to the first version seen, one build is pinned per version,
 * and jobs keyed to a version go only to workers carrying it. */
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
#include "broker/status.h"
#include "broker/worker_io.h"

static proto_plugin_info_t s_info(const char *name, const char *version, uint8_t build)
{
    proto_plugin_info_t pi = {.name = (char *)name, .version = (char *)version,
                              .objectives = 2, .flags = PROTO_PLUGIN_DETERMINISTIC};
    memset(pi.digest, build, sizeof pi.digest);
    return pi;
}

/* Usage: versions of one name, resolved as a SUBMIT resolves them. */
static void test_usage_example(void **state)
{
    (void)state;
    broker_catalog_t c;
    broker_catalog_init(&c);
    const char *seen[] = {"1.2", "1.10", "1.9", "2.0", "10"};
    for (size_t i = 0; i < 5; i++) {
        proto_plugin_info_t pi = s_info("granular", seen[i], 1);
        assert_non_null(broker_catalog_report(&c, &pi, NULL));
    }
    assert_string_equal(broker_catalog_resolve(&c, "granular", "1")->version, "1.10");
    assert_string_equal(broker_catalog_resolve(&c, "granular", "1.9")->version, "1.9");
    assert_string_equal(broker_catalog_resolve(&c, "granular", "2")->version, "2.0");
    assert_string_equal(broker_catalog_resolve(&c, "granular", "10")->version, "10");
    assert_string_equal(broker_catalog_resolve(&c, "granular", NULL)->version, "1.2");
    assert_null(broker_catalog_resolve(&c, "granular", "3"));
    assert_null(broker_catalog_resolve(&c, "granular", "1.1")); /* not a prefix of 1.10 */
    assert_null(broker_catalog_resolve(&c, "other", NULL));
    char text[256];
    broker_catalog_versions(&c, "granular", text, sizeof text);
    assert_string_equal(text, "1.2, 1.9, 1.10, 2.0, 10");
    broker_catalog_names(&c, text, sizeof text);
    assert_string_equal(text, "granular"); /* once, however many versions */
    /* Dense ids, one per (name, version). */
    assert_int_equal(c.n, 5);
    for (uint32_t i = 0; i < c.n; i++)
        assert_int_equal(c.list[i]->id, i);
    broker_catalog_fini(&c);
}

/* A tie in order ("1.02" and "1.2") goes to the version seen first. */
static void test_tie_goes_to_first_seen(void **state)
{
    (void)state;
    broker_catalog_t c;
    broker_catalog_init(&c);
    proto_plugin_info_t a = s_info("p", "1.02", 1), b = s_info("p", "1.2", 1);
    broker_catalog_report(&c, &a, NULL);
    broker_catalog_report(&c, &b, NULL);
    assert_string_equal(broker_catalog_resolve(&c, "p", "1")->version, "1.02");
    broker_catalog_fini(&c);
}

/* One build pinned per version: another build of 1.0 is refused, the same
 * build as 2.0 is a version of its own. */
static void test_build_pinned_per_version(void **state)
{
    (void)state;
    broker_catalog_t c;
    broker_catalog_init(&c);
    proto_plugin_info_t a = s_info("p", "1.0", 1), b = s_info("p", "1.0", 2),
                        v2 = s_info("p", "2.0", 2);
    broker_plugin_t *pa = broker_catalog_report(&c, &a, NULL);
    broker_plugin_t *known = NULL;
    assert_null(broker_catalog_report(&c, &b, &known));
    assert_ptr_equal(known, pa);
    assert_int_equal(pa->n_digests, 2);
    broker_plugin_t *p2 = broker_catalog_report(&c, &v2, NULL);
    assert_non_null(p2);
    assert_ptr_not_equal(p2, pa);
    assert_int_equal(p2->n_digests, 1);
    broker_catalog_fini(&c);
}

static broker_worker_t *s_worker(broker_t *b, const char *rid, const char *version)
{
    proto_plugin_info_t pi = s_info("p", version, 1);
    proto_hello_t h = {.name = (char *)rid, .host = (char *)"localhost",
                       .arch = (char *)"x86_64", .slots = 4, .n_plugins = 1, .plugins = &pi};
    broker_worker_t *w = broker_worker_on_hello(b, (const uint8_t *)rid, strlen(rid), &h);
    broker_registry_add_credits(&b->registry, w, 100);
    return w;
}

static int s_submit(broker_t *b, const char *run_id, const char *plugin, double g0, uint32_t n)
{
    proto_item_t items[16];
    double g[16];
    assert_true(n <= 16);
    for (uint32_t i = 0; i < n; i++) {
        g[i] = g0 + i;
        items[i] = (proto_item_t){.tag = i + 1, .genome_len = 8, .genome = (uint8_t *)&g[i]};
    }
    proto_submit_t s = {.run_id = (char *)run_id, .seed_mode = PROTO_SEED_GENOME,
                        .batch_tag = 1, .plugin = (char *)plugin, .params = (char *)"{}",
                        .n_items = n, .items = items};
    return broker_client_submit(b, (const uint8_t *)"c", 1, "local", &s);
}

/* Every job a worker holds is keyed to the version it carries. */
static void s_assert_held_version(const broker_worker_t *w, const char *version, uint32_t n)
{
    assert_int_equal(w->held, n);
    for (const broker_eval_t *e = w->jobs_head; e; e = e->next)
        assert_string_equal(e->plugin->version, version);
}

static void test_routing_by_version(void **state)
{
    (void)state;
    broker_t *b = calloc(1, sizeof *b);
    broker_core_init(b, 5000, 1000, 3, NULL);
    broker_worker_timers_start(b);
    broker_worker_t *w1 = s_worker(b, "w1", "1.0");
    broker_worker_t *w2 = s_worker(b, "w2", "2.0");
    assert_int_equal(s_submit(b, "r2", "p@2", 0, 8), 0);
    assert_int_equal(broker_dispatch_turn(b), 8);
    s_assert_held_version(w1, "1.0", 0);
    s_assert_held_version(w2, "2.0", 8);
    assert_int_equal(s_submit(b, "r1", "p@1.0", 100, 6), 0);
    assert_int_equal(broker_dispatch_turn(b), 6);
    s_assert_held_version(w1, "1.0", 6);
    assert_int_equal(s_submit(b, "r0", "p", 200, 3), 0); /* the first version seen */
    assert_int_equal(broker_dispatch_turn(b), 3);
    s_assert_held_version(w1, "1.0", 9);
    s_assert_held_version(w2, "2.0", 8);
    assert_int_equal(s_submit(b, "r3", "p@3", 300, 1), PROTO_REFUSE_UNKNOWN_PLUGIN);
    assert_int_equal(s_submit(b, "r3", "p@", 300, 1), PROTO_REFUSE_UNKNOWN_PLUGIN);
    /* A known version nobody connected carries: a constraint resolving to
     * it is accepted, its jobs wait, and a warning names what is offered. */
    broker_worker_t *w3 = s_worker(b, "w3", "1.10");
    broker_dispatch_lose_worker(b, w3);
    assert_int_equal(s_submit(b, "r4", "p@1", 400, 2), 0);
    assert_int_equal(broker_dispatch_turn(b), 0);
    proto_status_t st;
    broker_status_fill(b, "local", 1, &st);
    int said = 0;
    for (uint32_t i = 0; i < st.n_warnings; i++)
        said |= strcmp(st.warnings[i], "plugin p 1.10: no connected worker offers plugin p "
                                       "version 1.10; workers offer it at another version: "
                                       "1.0 (1 worker), 2.0 (1 worker); its jobs wait for a "
                                       "worker with version 1.10 (give a version constraint, "
                                       "p@VERSION, to use another)") == 0;
    assert_true(said);
    broker_status_clear(&st);
    broker_worker_t *w4 = s_worker(b, "w4", "1.10");
    assert_int_equal(broker_dispatch_turn(b), 2);
    s_assert_held_version(w4, "1.10", 2);
    broker_status_fill(b, "local", 1, &st);
    assert_int_equal(st.n_warnings, 0);
    broker_status_clear(&st);
    broker_core_fini(b);
    free(b);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_tie_goes_to_first_seen),
        cmocka_unit_test(test_build_pinned_per_version),
        cmocka_unit_test(test_routing_by_version),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
