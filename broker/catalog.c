/* catalog.c: the plugin catalog (see catalog.h). Owns the entries and their
 * strings; entries are never removed, so pointers to them stay valid for the
 * broker's life (evaluations and run queues keep one). */
#include "catalog.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/log.h"
#include "key.h"
#include "params.h"
#include "version.h"

static void s_free_seed_params(broker_plugin_t *p)
{
    for (uint32_t i = 0; i < p->n_seed_params; i++)
        free(p->seed_params[i]);
    free(p->seed_params);
    p->seed_params = NULL;
    p->n_seed_params = 0;
}

static int s_same_seed_params(const broker_plugin_t *p, const proto_plugin_info_t *info)
{
    if (p->n_seed_params != info->n_seed_params)
        return 0;
    for (uint32_t i = 0; i < p->n_seed_params; i++)
        if (strcmp(p->seed_params[i], info->seed_params[i]) != 0)
            return 0;
    return 1;
}

/* Takes the list from a report. The store loader reports a NULL list with a
 * count of UINT32_MAX for "not recorded" (a store older than the list). */
static void s_take_seed_params(broker_plugin_t *p, const proto_plugin_info_t *info)
{
    s_free_seed_params(p);
    p->seed_params_known = info->n_seed_params != UINT32_MAX;
    if (!p->seed_params_known || info->n_seed_params == 0)
        return;
    p->seed_params = common_xcalloc(info->n_seed_params, sizeof *p->seed_params);
    for (uint32_t i = 0; i < info->n_seed_params; i++)
        p->seed_params[i] = common_xstrdup(info->seed_params[i]);
    p->n_seed_params = info->n_seed_params;
}

/* Takes the defaults from a report: NULL means "not recorded" (the store
 * loader, for a store older than them), "" means none. */
static void s_take_param_defaults(broker_plugin_t *p, const proto_plugin_info_t *info)
{
    free(p->param_defaults);
    p->param_defaults = NULL;
    p->param_defaults_known = info->param_defaults != NULL;
    if (info->param_defaults && info->param_defaults[0])
        p->param_defaults = common_xstrdup(info->param_defaults);
}

static const void *s_name_key(const void *value, size_t *len)
{
    const broker_plugin_t *p = value;
    *len = strlen(p->name);
    return p->name;
}

static const void *s_ref_key(const void *value, size_t *len)
{
    const broker_plugin_t *p = value;
    *len = p->ref_len;
    return p->ref;
}

void broker_catalog_init(broker_catalog_t *self)
{
    memset(self, 0, sizeof *self);
    self->by_name = broker_table_new(s_name_key);
    self->by_ref = broker_table_new(s_ref_key);
}

void broker_catalog_fini(broker_catalog_t *self)
{
    for (uint32_t i = 0; i < self->n; i++) {
        free(self->list[i]->name);
        free(self->list[i]->version);
        free(self->list[i]->ref);
        s_free_seed_params(self->list[i]);
        free(self->list[i]->param_defaults);
        free(self->list[i]);
    }
    free(self->list);
    broker_table_destroy(&self->by_name);
    broker_table_destroy(&self->by_ref);
    memset(self, 0, sizeof *self);
}

broker_plugin_t *broker_catalog_first(const broker_catalog_t *self, const char *name)
{
    return broker_table_get(self->by_name, name, strlen(name));
}

broker_plugin_t *broker_catalog_get(const broker_catalog_t *self, const char *name,
                                    const char *version)
{
    size_t nl = strlen(name), vl = strlen(version);
    if (nl + vl + 1 > 2 * PROTO_MAX_NAME_BYTES)
        return NULL; /* longer than any entry can be */
    char ref[2 * PROTO_MAX_NAME_BYTES + 1];
    memcpy(ref, name, nl + 1);
    memcpy(ref + nl + 1, version, vl);
    return broker_table_get(self->by_ref, ref, nl + 1 + vl);
}

broker_plugin_t *broker_catalog_resolve(const broker_catalog_t *self, const char *name,
                                        const char *constraint)
{
    broker_plugin_t *first = broker_catalog_first(self, name);
    if (!constraint)
        return first;
    broker_plugin_t *best = NULL;
    for (broker_plugin_t *p = first; p; p = p->next_version)
        if (proto_version_matches(p->version, constraint) &&
            (!best || proto_version_cmp(p->version, best->version) > 0))
            best = p; /* strictly higher: a tie keeps the one seen first */
    return best;
}

int broker_plugin_stochastic(const broker_plugin_t *plugin, const char *canonical_params)
{
    if (plugin->flags & PROTO_PLUGIN_DETERMINISTIC)
        return 0;
    return !proto_params_all_zero(canonical_params, plugin->seed_params, plugin->n_seed_params);
}

static broker_plugin_t *s_new_entry(broker_catalog_t *self, const proto_plugin_info_t *info)
{
    broker_plugin_t *p = common_xcalloc(1, sizeof *p);
    p->id = self->n;
    p->name = common_xstrdup(info->name);
    p->version = common_xstrdup(info->version);
    size_t nl = strlen(info->name), vl = strlen(info->version);
    p->ref_len = nl + 1 + vl;
    p->ref = common_xmalloc(p->ref_len + 1);
    memcpy(p->ref, info->name, nl + 1);
    memcpy(p->ref + nl + 1, info->version, vl + 1);
    p->objectives = info->objectives;
    p->flags = info->flags;
    s_take_seed_params(p, info);
    s_take_param_defaults(p, info);
    if (self->n == self->cap) {
        self->cap = self->cap ? self->cap * 2 : 8;
        self->list = common_xrealloc(self->list, self->cap, sizeof *self->list);
    }
    self->list[self->n++] = p;
    broker_table_put(self->by_ref, p->ref, p->ref_len, p);
    broker_plugin_t *first = broker_catalog_first(self, p->name);
    if (!first) {
        broker_table_put(self->by_name, p->name, strlen(p->name), p);
        return p;
    }
    broker_plugin_t *last = first;
    while (last->next_version)
        last = last->next_version;
    last->next_version = p;
    char versions[512];
    broker_catalog_versions(self, p->name, versions, sizeof versions);
    LOG_INFO("plugin %s is now known at version %s too (known: %s); jobs for each version go "
             "only to workers that carry it, and a plugin given without a version stays %s",
             p->name, p->version, versions, first->version);
    return p;
}

broker_plugin_t *broker_catalog_report(broker_catalog_t *self, const proto_plugin_info_t *info,
                                       broker_plugin_t **known)
{
    broker_plugin_t *p = broker_catalog_get(self, info->name, info->version);
    if (!p)
        p = s_new_entry(self, info);
    if (known)
        *known = p;
    if (p->flags != info->flags)
        LOG_WARN("plugin %s %s is reported with flags %u and %u; keeping %u", p->name,
                 p->version, p->flags, info->flags, p->flags);
    if (p->seed_params_known && info->n_seed_params != UINT32_MAX &&
        !s_same_seed_params(p, info))
        LOG_WARN("plugin %s %s is reported with another list of seed params (%u names, "
                 "first %u); keeping the first",
                 p->name, p->version, info->n_seed_params, p->n_seed_params);
    int seen = 0;
    for (uint32_t i = 0; i < p->n_digests; i++)
        seen |= memcmp(p->digests[i], info->digest, PROTO_DIGEST_BYTES) == 0;
    if (!seen && p->n_digests < BROKER_CATALOG_MAX_DIGESTS) {
        memcpy(p->digests[p->n_digests++], info->digest, PROTO_DIGEST_BYTES);
        if (p->n_digests > 1) {
            char a[2 * PROTO_DIGEST_BYTES + 1], d[2 * PROTO_DIGEST_BYTES + 1];
            proto_hex(p->digests[0], PROTO_DIGEST_BYTES, a);
            proto_hex(info->digest, PROTO_DIGEST_BYTES, d);
            LOG_WARN("plugin %s %s is reported with another build (digest %.16s, pinned %.16s);"
                     " jobs go only to workers with the pinned build", p->name, p->version, d, a);
        }
    }
    /* One build per name and version (see the top of catalog.h). */
    if (p->n_digests > 0 && memcmp(p->digests[0], info->digest, PROTO_DIGEST_BYTES) != 0)
        return NULL;
    /* Only the pinned build may fill a list the store did not record. */
    if (!p->seed_params_known)
        s_take_seed_params(p, info);
    if (!p->param_defaults_known)
        s_take_param_defaults(p, info);
    else if (info->param_defaults &&
             strcmp(p->param_defaults ? p->param_defaults : "", info->param_defaults) != 0)
        LOG_WARN("plugin %s %s is reported with other param defaults (%.200s, keeping %.200s)",
                 p->name, p->version, info->param_defaults,
                 p->param_defaults ? p->param_defaults : "none");
    return p;
}

static int s_cmp_names(const void *a, const void *b)
{
    return strcmp((*(broker_plugin_t *const *)a)->name, (*(broker_plugin_t *const *)b)->name);
}

void broker_catalog_names(const broker_catalog_t *self, char *out, size_t outlen)
{
    if (outlen == 0)
        return;
    out[0] = '\0';
    broker_plugin_t **sorted = common_xcalloc(self->n ? self->n : 1, sizeof *sorted);
    uint32_t n = 0;
    for (uint32_t i = 0; i < self->n; i++)
        if (broker_catalog_first(self, self->list[i]->name) == self->list[i])
            sorted[n++] = self->list[i]; /* one per name */
    qsort(sorted, n, sizeof *sorted, s_cmp_names);
    size_t used = 0;
    for (uint32_t i = 0; i < n && used < outlen; i++) {
        int k = snprintf(out + used, outlen - used, "%s%s", i ? ", " : "", sorted[i]->name);
        if (k < 0)
            break;
        used += (size_t)k;
    }
    free(sorted);
}

static int s_cmp_versions(const void *a, const void *b)
{
    const broker_plugin_t *x = *(broker_plugin_t *const *)a, *y = *(broker_plugin_t *const *)b;
    int d = proto_version_cmp(x->version, y->version);
    return d ? d : (x->id > y->id) - (x->id < y->id);
}

/* The versions of p's name other than p's that connected workers carry
 * ("1.3 (2 workers), 2.0 (1 worker)"), in version order; "" when none.
 * Returns how many workers carry them. */
static uint32_t s_carried_elsewhere(const broker_catalog_t *self, const broker_plugin_t *p,
                                    char *out, size_t outlen)
{
    broker_plugin_t *list[64];
    uint32_t n = 0, workers = 0;
    for (broker_plugin_t *q = broker_catalog_first(self, p->name); q && n < 64;
         q = q->next_version)
        if (q != p && q->carriers > 0)
            list[n++] = q;
    qsort(list, n, sizeof *list, s_cmp_versions);
    out[0] = '\0';
    size_t used = 0;
    for (uint32_t i = 0; i < n && used < outlen; i++) {
        workers += list[i]->carriers;
        int k = snprintf(out + used, outlen - used, "%s%s (%u worker%s)", i ? ", " : "",
                         list[i]->version, list[i]->carriers, list[i]->carriers == 1 ? "" : "s");
        if (k < 0)
            break;
        used += (size_t)k;
    }
    return workers;
}

void broker_catalog_versions(const broker_catalog_t *self, const char *name, char *out,
                             size_t outlen)
{
    if (outlen == 0)
        return;
    out[0] = '\0';
    broker_plugin_t *list[64];
    uint32_t n = 0, more = 0;
    for (broker_plugin_t *q = broker_catalog_first(self, name); q; q = q->next_version) {
        if (n < 64)
            list[n++] = q;
        else
            more++;
    }
    qsort(list, n, sizeof *list, s_cmp_versions);
    size_t used = 0;
    for (uint32_t i = 0; i < n && used < outlen; i++) {
        int k = snprintf(out + used, outlen - used, "%s%s", i ? ", " : "", list[i]->version);
        if (k < 0)
            break;
        used += (size_t)k;
    }
    if (more && used < outlen)
        snprintf(out + used, outlen - used, " and %u more", more);
}

static void s_push(char ***warnings, uint32_t *n, char *text)
{
    *warnings = common_xrealloc(*warnings, (size_t)*n + 1, sizeof **warnings);
    (*warnings)[(*n)++] = text;
}

uint32_t broker_catalog_warnings(const broker_catalog_t *self, const uint8_t *wanted,
                                 char ***warnings, uint32_t n)
{
    for (uint32_t i = 0; i < self->n; i++) {
        const broker_plugin_t *p = self->list[i];
        char text[1024];
        if (p->n_digests > 1) {
            char a[2 * PROTO_DIGEST_BYTES + 1], b[2 * PROTO_DIGEST_BYTES + 1];
            proto_hex(p->digests[0], PROTO_DIGEST_BYTES, a);
            proto_hex(p->digests[1], PROTO_DIGEST_BYTES, b);
            a[12] = b[12] = '\0';
            snprintf(text, sizeof text,
                     "plugin %s %s is reported with %s different builds (digests %s…, %s…): "
                     "results may differ bitwise; only workers with build %s… (the first one "
                     "this store saw) get its jobs. Give a new build a new plugin version.",
                     p->name, p->version, p->n_digests == 2 ? "two" : "several", a, b, a);
            s_push(warnings, &n, common_xstrdup(text));
        }
        if (p->carriers > 0)
            continue;
        char pinned[2 * PROTO_DIGEST_BYTES + 1] = "";
        if (p->n_digests > 0) {
            proto_hex(p->digests[0], PROTO_DIGEST_BYTES, pinned);
            pinned[12] = '\0';
        }
        char others[512];
        uint32_t elsewhere = s_carried_elsewhere(self, p, others, sizeof others);
        int waits = wanted && wanted[p->id];
        if (p->blocked_offers > 0) {
            /* Said even with nothing queued, as it always was: a pinned-out
             * build is worth knowing before the first batch. */
            snprintf(text, sizeof text,
                     "plugin %s %s: no connected worker can take its jobs: %u worker(s) offer "
                     "it with another build%s%s; its jobs wait for a worker with version %s%s%s",
                     p->name, p->version, p->blocked_offers,
                     elsewhere ? ", and workers offer other versions: " : "",
                     elsewhere ? others : "", p->version, pinned[0] ? " and build " : "",
                     pinned[0] ? pinned : "");
            s_push(warnings, &n, common_xstrdup(text));
        } else if (waits && elsewhere) {
            snprintf(text, sizeof text,
                     "plugin %s %s: no connected worker offers plugin %s version %s; workers "
                     "offer it at another version: %s; its jobs wait for a worker with version "
                     "%s (give a version constraint, %s@VERSION, to use another)",
                     p->name, p->version, p->name, p->version, others, p->version, p->name);
            s_push(warnings, &n, common_xstrdup(text));
        } else if (waits) {
            snprintf(text, sizeof text,
                     "plugin %s %s: no connected worker offers plugin %s version %s; its jobs "
                     "wait until one joins",
                     p->name, p->version, p->name, p->version);
            s_push(warnings, &n, common_xstrdup(text));
        }
    }
    return n;
}
