/* cli_pool.c: what the pool's status says about plugins (cli_pool.h): the
 * names it carries, whether a worker carries a version a reference
 * ("name" or "name@constraint") matches, and a plugin version whose jobs
 * wait because no connected worker can take them (read from the broker's
 * warnings, which start "plugin NAME VERSION: no connected worker",
 * broker/catalog.h). */
#include "cli_pool.h"

#include <stdio.h>
#include <string.h>

#include "limits.h" /* proto's: PROTO_MAX_NAME_BYTES */
#include "version.h"

int cli_pool_plugin_blocked(fitfarm_client_t *client, const char *plugin, int timeout_ms,
                            char *out, size_t len)
{
    char name[PROTO_MAX_NAME_BYTES + 1];
    const char *constraint = NULL;
    if (proto_plugin_ref_split(plugin, name, sizeof name, &constraint, NULL, 0) != 0)
        return 0;
    fitfarm_status_t *st = NULL;
    int found = 0;
    if (fitfarm_status_get(client, timeout_ms, &st) != 0)
        return 0;
    char head[PROTO_MAX_NAME_BYTES + 16];
    snprintf(head, sizeof head, "plugin %s ", name);
    for (size_t i = 0; i < fitfarm_status_n_warnings(st) && !found; i++) {
        const char *w = fitfarm_status_warning(st, i);
        if (strncmp(w, head, strlen(head)) != 0)
            continue;
        /* "plugin NAME VERSION: no connected worker ..." */
        const char *v = w + strlen(head);
        const char *colon = strstr(v, ": no connected worker ");
        if (!colon || (size_t)(colon - v) > PROTO_MAX_NAME_BYTES || memchr(v, ' ', (size_t)(colon - v)))
            continue;
        char version[PROTO_MAX_NAME_BYTES + 1];
        snprintf(version, sizeof version, "%.*s", (int)(colon - v), v);
        if (constraint && !proto_version_matches(version, constraint))
            continue;
        snprintf(out, len, "%s", w);
        found = 1;
    }
    fitfarm_status_destroy(&st);
    return found;
}

void cli_pool_plugins(fitfarm_client_t *client, char *buf, size_t len, int *has,
                      const char *want, int *n_workers)
{
    buf[0] = '\0';
    *has = 0;
    *n_workers = -1;
    char want_name[PROTO_MAX_NAME_BYTES + 1];
    const char *constraint = NULL;
    if (proto_plugin_ref_split(want, want_name, sizeof want_name, &constraint, NULL, 0) != 0)
        snprintf(want_name, sizeof want_name, "%s", ""); /* matches nothing */
    fitfarm_status_t *st = NULL;
    if (fitfarm_status_get(client, 5000, &st) != 0)
        return;
    *n_workers = (int)fitfarm_status_n_workers(st);
    size_t used = 0;
    for (size_t w = 0; w < fitfarm_status_n_workers(st); w++) {
        fitfarm_worker_info_t wi = FITFARM_WORKER_INFO_INIT;
        fitfarm_status_worker(st, w, &wi);
        for (size_t p = 0; p < wi.n_plugins; p++) {
            const char *full = wi.plugins[p]; /* name@version */
            size_t nl = strcspn(full, "@");
            const char *version = full[nl] ? full + nl + 1 : "";
            if (strlen(want_name) == nl && strncmp(full, want_name, nl) == 0 &&
                (!constraint || proto_version_matches(version, constraint)))
                *has = 1;
            char name[PROTO_MAX_NAME_BYTES + 1];
            snprintf(name, sizeof name, "%.*s", (int)nl, full);
            /* Skip names already listed (several workers carry the same plugin). */
            char probe[PROTO_MAX_NAME_BYTES + 4];
            snprintf(probe, sizeof probe, ", %s,", name);
            char hay[4096 + 4];
            snprintf(hay, sizeof hay, ", %s,", buf);
            if (strstr(hay, probe))
                continue;
            int n = snprintf(buf + used, len - used, "%s%s", used ? ", " : "", name);
            if (n < 0 || (size_t)n >= len - used)
                break;
            used += (size_t)n;
        }
    }
    fitfarm_status_destroy(&st);
}

void cli_pool_versions(fitfarm_client_t *client, const char *name, char *buf, size_t len)
{
    buf[0] = '\0';
    fitfarm_status_t *st = NULL;
    if (fitfarm_status_get(client, 5000, &st) != 0)
        return;
    size_t used = 0;
    for (size_t w = 0; w < fitfarm_status_n_workers(st); w++) {
        fitfarm_worker_info_t wi = FITFARM_WORKER_INFO_INIT;
        fitfarm_status_worker(st, w, &wi);
        for (size_t p = 0; p < wi.n_plugins; p++) {
            const char *full = wi.plugins[p];
            size_t nl = strcspn(full, "@");
            if (!full[nl] || strlen(name) != nl || strncmp(full, name, nl) != 0)
                continue;
            char probe[PROTO_MAX_NAME_BYTES + 4];
            snprintf(probe, sizeof probe, ", %s,", full + nl + 1);
            char hay[4096 + 4];
            snprintf(hay, sizeof hay, ", %s,", buf);
            if (strstr(hay, probe))
                continue;
            int n = snprintf(buf + used, len - used, "%s%s", used ? ", " : "", full + nl + 1);
            if (n < 0 || (size_t)n >= len - used)
                break;
            used += (size_t)n;
        }
    }
    fitfarm_status_destroy(&st);
}

int cli_pool_say_unknown(fitfarm_client_t *client, const char *prog, const char *plugin,
                         const char *detail)
{
    char list[4096];
    int has, n_workers;
    cli_pool_plugins(client, list, sizeof list, &has, plugin, &n_workers);
    if (detail)
        fprintf(stderr, "%s: %s\n", prog, detail);
    else
        fprintf(stderr, "%s: the pool has no plugin \"%s\"\n", prog, plugin);
    fprintf(stderr, "%s: plugins the pool has: %s\n", prog, list[0] ? list : "(none)");
    return 2;
}
