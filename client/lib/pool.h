/* pool.h: the embedded local pool: the fitfarm-broker and fitfarm-worker
 * programs started as child processes of the caller (posix_spawn, never a
 * fork of the caller's image), talking over ipc:// sockets in a private 0700
 * temporary folder. Internal to the client library (not API).
 *
 * Not here: the connection to the broker (client.c) or any ZeroMQ state;
 * where the programs are (programs.c). */
#ifndef CLIENT_POOL_H
#define CLIENT_POOL_H

#include <stddef.h>
#include <sys/types.h>

#include "client/include/fitfarm.h"

typedef struct client_pool client_pool_t;

/* Starts the broker, waits until it listens, starts the worker and waits
 * until it has registered, all within options->connect_timeout_ms (0 =
 * 10000). Reads slots, plugin_dir, store_dir, programs_dir and exec_plugins
 * from options (borrowed for the call only). Safe in a threaded host: the
 * children are spawned, and nothing but them inherits the lifeline that ends
 * them when this process dies. On success returns 0 and *out is a new pool
 * the caller destroys; on failure returns a FITFARM_E* code and writes a
 * sentence to err. Blocks; not thread-safe on one pool. */
int client_pool_new(const fitfarm_options_t *options, client_pool_t **out, char *err,
                    size_t errlen);

/* The broker's client endpoint ("ipc://DIR/clients"); borrowed. */
const char *client_pool_endpoint(const client_pool_t *self);

/* Returns 0 while both children run; otherwise a FITFARM_ECONNECT and a
 * sentence naming the child that ended and how. Reaps it. */
int client_pool_check(client_pool_t *self, char *err, size_t errlen);

/* SIGTERM both children, wait up to about 5 s, then SIGKILL (by PID); closes
 * the lifeline; removes the folder; frees; sets *self_p to NULL. Accepts NULL. */
void client_pool_destroy(client_pool_t **self_p);

/* The children's PIDs and the folder (borrowed); -1 and NULL for no pool. */
void client_pool_pids(const client_pool_t *self, pid_t *broker, pid_t *worker, const char **dir);

/* Test hook: the same for the pool this process started last, while it
 * exists (-1, -1, NULL otherwise). Reaches the pool without the client
 * object; for tests only. */
void client_pool_test_last(pid_t *broker, pid_t *worker, const char **dir);

#endif
