/* catalog.h: every plugin the broker has ever seen reported by a worker (or
 * read back from the store), one entry per name and version: the
 * objectives, flags (determinism decides whether the seed is part of the
 * key), the build digests reported, and how many connected workers carry it
 * right now.
 *
 * Versions. A content key names one plugin version (DESIGN.md), so two
 * versions of one name are two entries with two dense ids, and a worker
 * carrying one of them gets only the jobs keyed to it. A worker carries at
 * most one version of each name (worker/registry.c refuses a second file of
 * the same name); two workers may carry two versions.
 *
 * Resolving a plugin reference at SUBMIT (broker_catalog_resolve), before
 * the key is computed and so before anyone knows which worker will run it:
 *   - "name@C": among the entries of that name whose version C matches
 *     (proto/version.h: V == C, or V starts with C and '.'), the highest by
 *     proto_version_cmp (Debian's version order: numeric runs as numbers,
 *     the rest as strings); a tie between two spellings of one version
 *     ("1.02", "1.2") goes to the one seen first. Known from the store
 *     counts, connected or not: the batch waits for a carrier rather than
 *     silently changing its key with who happens to be connected.
 *   - "name": the first version this store saw for that name (kept across
 *     restarts by plugins.first_seen), as before versions could be chosen,
 *     so a run started before then resumes with the same keys.
 *
 * One build per version: the first build digest reported for a name and
 * version (remembered in the store across restarts) is pinned; a worker
 * reporting another build of it gets none of its jobs, and STATUS warns that
 * results may differ bitwise. Keeping one build per version keeps the cache
 * honest: the key is fixed at submit, so it cannot name the build of the
 * worker that will run the job. A new build is given a new plugin version
 * (a new key space). Not here: which worker carries what (registry.h). */
#ifndef BROKER_CATALOG_H
#define BROKER_CATALOG_H

#include <stddef.h>
#include <stdint.h>

#include "msg.h"
#include "table.h"
#include "timing.h"

#define BROKER_CATALOG_MAX_DIGESTS 8 /* distinct builds remembered per version */

typedef struct broker_plugin {
    uint32_t id; /* dense index, 0..n-1: workers keep a bitmap over it */
    char *name;
    char *version;
    char *ref; /* name, NUL, version: the key of by_ref (table.h borrows it) */
    size_t ref_len;
    struct broker_plugin *next_version; /* same name, next in first-seen order */
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
    broker_timing_t timing;  /* wall seconds of its evaluations, any worker (timing.h) */
    uint32_t carriers;       /* connected workers that carry it */
    uint32_t blocked_offers; /* connected workers offering this name and version
                              * with another build: they get none of its jobs */
} broker_plugin_t;

typedef struct {
    broker_table_t *by_name; /* name -> its first-seen version */
    broker_table_t *by_ref;  /* name NUL version -> entry */
    broker_plugin_t **list;  /* by id */
    uint32_t n, cap;
} broker_catalog_t;

void broker_catalog_init(broker_catalog_t *self);
void broker_catalog_fini(broker_catalog_t *self);

/* Borrowed entries, valid until fini; NULL if never seen. get: that name and
 * version; first: the first version seen for name (the head of its
 * next_version list). */
broker_plugin_t *broker_catalog_get(const broker_catalog_t *self, const char *name,
                                    const char *version);
broker_plugin_t *broker_catalog_first(const broker_catalog_t *self, const char *name);
/* The entry a SUBMIT's plugin reference resolves to (top of this file):
 * constraint NULL means none. Borrowed; NULL when no known version of name
 * matches. */
broker_plugin_t *broker_catalog_resolve(const broker_catalog_t *self, const char *name,
                                        const char *constraint);
/* Records one plugin from a HELLO (or the store: there info->n_seed_params
 * UINT32_MAX means the list was not recorded), creating its entry for a new
 * name and version. Returns the entry the worker may take jobs for, or NULL
 * when it reports another build than the pinned one (that worker must not
 * get jobs keyed to it; *known, when given, is then set to the entry). */
broker_plugin_t *broker_catalog_report(broker_catalog_t *self, const proto_plugin_info_t *info,
                                       broker_plugin_t **known);
/* Writes "a, b, c" (distinct names in sorted order) into out; "" when empty. */
void broker_catalog_names(const broker_catalog_t *self, char *out, size_t outlen);
/* Writes the known versions of name, "1.2, 1.10" in version order, into
 * out; "" when the name is unknown. */
void broker_catalog_versions(const broker_catalog_t *self, const char *name, char *out,
                             size_t outlen);
/* Appends warnings (malloc'd strings, caller frees each and the array) about
 * mixed builds, and about versions no connected worker can take jobs for.
 * wanted (n entries by id, may be NULL) marks versions with queued jobs: a
 * version nobody offers is only worth a warning while jobs wait for it.
 * Each such warning starts "plugin NAME VERSION: no connected worker " (the
 * client looks for that, client/cli/cli_pool.c). Returns the new count. */
uint32_t broker_catalog_warnings(const broker_catalog_t *self, const uint8_t *wanted,
                                 char ***warnings, uint32_t n);
/* 1 when the seed is part of the key of a request with these canonical
 * params: the plugin is not deterministic, and its seed params are not all
 * given as 0 (proto_params_all_zero). */
int broker_plugin_stochastic(const broker_plugin_t *plugin, const char *canonical_params);

#endif
