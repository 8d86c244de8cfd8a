/* secure.h: the worker's side of CURVE. Decides at start whether the worker
 * may connect (keys given, or --insecure to a local endpoint) and makes the
 * DEALER socket a CURVE client with its own key pair and the broker's public
 * key. The secret is read into secure memory and wiped as soon as ZeroMQ has
 * its copy. Not here: the socket's other options (loop.c). */
#ifndef WORKER_SECURE_H
#define WORKER_SECURE_H

#include "worker.h"

/* Checks the configuration before anything starts: returns 0, or -1 after
 * logging a sentence that says why and what to do. */
int worker_secure_check(const worker_config_t *config);
/* Applies CURVE to sock (before connect) unless config->insecure. Returns 0,
 * or -1 (logged). */
int worker_secure_socket(void *sock, const worker_config_t *config);

#endif
