/* catalog.h: every plugin the broker has ever seen reported by a worker, by
 * name: the version keys are computed with, objectives, flags (determinism
 * decides whether the seed is part of the key), the build digests reported,
 * and how many connected workers carry it right now.
 *
 * The first version reported for a name is the catalog's version; a worker
 * reporting another version of that name does not get its jobs, and STATUS
 * warns. Likewise the first build digest reported for that name and version
 * (remembered in the store across restarts) is pinned: a worker reporting
 * another build does not get its jobs, and STATUS warns that results may
 * differ bitwise. Keeping one build per version keeps the cache honest: a
 * content key names one computation, and the key is fixed at submit, before
 * anyone knows which worker will run the job, so it cannot name the build of
 * that worker. A new build is given a new plugin version (a new key space).
 * Not here: which worker carries what (registry.h). */
#ifndef BROKER_CATALOG_H
#define BROKER_CATALOG_H

#include <stddef.h>
#include <stdint.h>

#include "msg.h"
#include "table.h"

#define BROKER_CATALOG_MAX_DIGESTS 8 /* distinct builds remembered per plugin */

typedef struct {
    uint32_t id; /* dense index, 0..n-1: workers keep a bitmap over it */
    char *name;
    char *version;
    uint32_t objectives;
    uint32_t flags; /* PROTO_PLUGIN_* */
    uint8_t digests[BROKER_CATALOG_MAX_DIGESTS][PROTO_DIGEST_BYTES];
    uint32_t n_digests;
    /* The plugin's seed params (msg.h proto_plugin_info_t): a request whose
     * params give each of them as 0 is keyed without the seed. First report
     * wins, like flags; seed_params_known is 0 for an entry reloaded from a
     * store that predates the list, which the next HELLO then fills. */
    char **seed_params;
    uint32_t n_seed_params;
    int seed_params_known;
    /* The plugin's declared param defaults (canonical JSON), or NULL for
     * none: a request's params are completed with them before keying
     * (proto_params_with_defaults). First report wins, like seed params;
     * param_defaults_known is 0 for an entry reloaded from a store that
     * predates them, which the next HELLO of the pinned build then fills. */
    char *param_defaults;
    int param_defaults_known;
    char *other_version; /* a different version seen for this name, or NULL */
    uint32_t carriers;   /* connected workers that carry it */
    uint32_t blocked_offers; /* connected workers offering the name with another
                              * build or version: they get none of its jobs */
} broker_plugin_t;

typedef struct {
    broker_table_t *by_name;
    broker_plugin_t **list;
    uint32_t n, cap;
} broker_catalog_t;

void broker_catalog_init(broker_catalog_t *self);
void broker_catalog_fini(broker_catalog_t *self);

/* Borrowed entry for name, valid until fini; NULL if never seen. */
broker_plugin_t *broker_catalog_get(const broker_catalog_t *self, const char *name);
/* Records one plugin from a HELLO (or the store: there info->n_seed_params
 * UINT32_MAX means the list was not recorded). Returns the entry the worker may take jobs
 * for, or NULL when it reports another version than the catalog's or another
 * build than the pinned one (that worker must not get jobs keyed to them). */
broker_plugin_t *broker_catalog_report(broker_catalog_t *self, const proto_plugin_info_t *info);
/* Writes "a, b, c" (names in sorted order) into out; "" when empty. */
void broker_catalog_names(const broker_catalog_t *self, char *out, size_t outlen);
/* Appends warnings (malloc'd strings, caller frees each and the array) about
 * mixed builds and versions. Returns the new count. */
uint32_t broker_catalog_warnings(const broker_catalog_t *self, char ***warnings, uint32_t n);
/* 1 when the seed is part of the key of a request with these canonical
 * params: the plugin is not deterministic, and its seed params are not all
 * given as 0 (proto_params_all_zero). */
int broker_plugin_stochastic(const broker_plugin_t *plugin, const char *canonical_params);

#endif
