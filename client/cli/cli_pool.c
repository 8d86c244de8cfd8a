/* cli_pool.c: a plugin the pool offers only with builds or versions the
 * broker gives no jobs to (cli_pool.h), read from the broker's warnings. */
#include "cli_pool.h"

#include <stdio.h>
#include <string.h>

int cli_pool_plugin_blocked(fitfarm_client_t *client, const char *plugin, int timeout_ms,
                            char *out, size_t len)
{
    fitfarm_status_t *st = NULL;
    int found = 0;
    if (fitfarm_status_get(client, timeout_ms, &st) != 0)
        return 0;
    char head[200];
    snprintf(head, sizeof head, "plugin %s ", plugin);
    for (size_t i = 0; i < fitfarm_status_n_warnings(st) && !found; i++) {
        const char *w = fitfarm_status_warning(st, i);
        if (strncmp(w, head, strlen(head)) == 0 && strstr(w, "no connected worker can take")) {
            snprintf(out, len, "%s", w);
            found = 1;
        }
    }
    fitfarm_status_destroy(&st);
    return found;
}
