/* status.h: test hooks of the client library (not API: the shared library
 * does not export them; tests link the static library). */
#ifndef CLIENT_STATUS_H
#define CLIENT_STATUS_H

#include <sys/types.h>

#include "client/include/fitfarm.h"

/* Test hook: PIDs of the embedded pool's broker and worker (-1 when there is
 * no embedded pool) and its folder (NULL when none; borrowed). */
void client_test_pool_pids(const fitfarm_client_t *self, pid_t *broker, pid_t *worker,
                           const char **dir);

#endif
