/* status.h: internal helpers the fitfarm CLI uses beyond the public API (not
 * API: the shared library does not export them; the CLI links the static
 * library). */
#ifndef CLIENT_STATUS_H
#define CLIENT_STATUS_H

#include <sys/types.h>

#include "client/include/fitfarm.h"
#include "msg.h"

/* Asks the broker for STATUS and waits up to timeout_ms (negative: no limit).
 * On success returns 0 and *status_out is a PROTO_STATUS message the caller
 * destroys with proto_msg_destroy. Otherwise a FITFARM_E* code, error set. */
int client_status(fitfarm_client_t *self, proto_msg_t **status_out, int timeout_ms);

/* Counters of a run since it was opened: results that arrived again and
 * were dropped (at-least-once on the wire), and requests re-sent after a
 * reconnect or refusal. */
void client_run_counters(const fitfarm_run_t *run, uint64_t *duplicates, uint64_t *resent);

/* Test hook: PIDs of the embedded pool's broker and worker (-1 when there is
 * no embedded pool) and its folder (NULL when none; borrowed). */
void client_test_pool_pids(const fitfarm_client_t *self, pid_t *broker, pid_t *worker,
                           const char **dir);

#endif
