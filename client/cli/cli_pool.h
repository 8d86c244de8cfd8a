/* cli_pool.h: what the pool's status says about one plugin, for the
 * subcommands that are about to wait on it. Not the status command's view
 * (cmd_status.c). */
#ifndef CLIENT_CLI_POOL_H
#define CLIENT_CLI_POOL_H

#include <stddef.h>

#include "fitfarm.h"

/* 1 when the broker warns that no connected worker can take the jobs of a
 * version of plugin ("name", or "name@constraint": a version it matches),
 * because none offers that version or only with another build (the jobs
 * wait), with the broker's sentence in out; 0 otherwise (also when the status
 * could not be read within timeout_ms). */
int cli_pool_plugin_blocked(fitfarm_client_t *client, const char *plugin, int timeout_ms,
                            char *out, size_t len);

/* The plugin names the pool carries ("zdt1, zdt2, ...", each once) into
 * buf; *has is 1 when a connected worker carries want ("name", or
 * "name@constraint": a version it matches, proto/version.h); *n_workers the
 * workers connected (-1 when the status could not be read within 5 s). */
void cli_pool_plugins(fitfarm_client_t *client, char *buf, size_t len, int *has,
                      const char *want, int *n_workers);

/* The versions of plugin name that connected workers carry ("1.0, 2.0",
 * each once, in the order first met) into buf; "" when none. */
void cli_pool_versions(fitfarm_client_t *client, const char *name, char *buf, size_t len);

/* Says on stderr, as prog, that the pool has no plugin (detail: the
 * library's sentence, or NULL) and which plugins it has. Returns 2, the
 * usage exit status. */
int cli_pool_say_unknown(fitfarm_client_t *client, const char *prog, const char *plugin,
                         const char *detail);

#endif
