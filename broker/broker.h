/* broker.h: the broker's single entry point, used by fitfarm-broker's main and
 * by the client library's embedded local pool (in a forked child process). */
#ifndef BROKER_BROKER_H
#define BROKER_BROKER_H

#include <stdint.h>

typedef struct {
    const char *clients_endpoint; /* bind address for clients, e.g. "tcp://127.0.0.1:5555" */
    const char *workers_endpoint; /* bind address for workers */
    const char *store_dir;        /* durable store folder; NULL = in memory only */
    int liveness_ms;              /* a worker silent this long is dropped; 0 = 5000 */
    int heartbeat_ms;             /* 0 = 1000 */
    unsigned attempts;            /* tries of a job that crashes or times out; 0 = 3 */
    /* Where to write the bound endpoints (after wildcard ports are resolved)
     * as two lines "clients ENDPOINT\nworkers ENDPOINT\n"; NULL = nowhere.
     * Written atomically (temp file + rename) once both are bound. */
    const char *endpoints_file;
} broker_config_t;

/* Runs the broker until SIGTERM or SIGINT (handlers installed here set a flag
 * that the loop reads). Returns 0 on a clean stop, or 1 after logging why it
 * could not start. Blocks; not thread-safe (one broker per process). */
int broker_main_run(const broker_config_t *config);

#endif
