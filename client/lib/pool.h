/* pool.h: the embedded local pool: a broker and a worker in two forked child
 * processes of the caller, talking over ipc:// sockets in a private temporary
 * folder. Internal to the client library (not API).
 *
 * Not here: the connection to the broker (client.c) or any ZeroMQ state; the
 * children are forked before the parent creates its ZeroMQ context. */
#ifndef CLIENT_POOL_H
#define CLIENT_POOL_H

#include <stddef.h>
#include <sys/types.h>

typedef struct client_pool client_pool_t;

/* Starts the broker and worker children. slots 0 = online CPUs; plugin_dir and
 * store_dir may be NULL. On success returns 0 and *out is a new pool the caller
 * destroys; on failure returns a FITFARM_E* code and writes a sentence to err. */
int client_pool_new(unsigned slots, const char *plugin_dir, const char *store_dir,
                    client_pool_t **out, char *err, size_t errlen);

/* The broker's client endpoint ("ipc://DIR/clients"); borrowed. */
const char *client_pool_endpoint(const client_pool_t *self);

/* Returns 0 while both children run; otherwise a FITFARM_ECONNECT and a
 * sentence naming the child that ended and how. Reaps it. */
int client_pool_check(client_pool_t *self, char *err, size_t errlen);

/* SIGTERM both children, wait up to about 5 s, then SIGKILL; removes the
 * folder; frees; sets *self_p to NULL. Accepts NULL. */
void client_pool_destroy(client_pool_t **self_p);

/* Test hook: the children's PIDs and the folder (borrowed). */
void client_pool_pids(const client_pool_t *self, pid_t *broker, pid_t *worker, const char **dir);

#endif
