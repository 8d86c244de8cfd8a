/* secure.h: the client library's side of CURVE (private, not API). A remote
 * broker is reached with CURVE (the caller's key pair and the broker's public
 * key, from files) unless the caller asked for plaintext, which is allowed
 * only to ipc://, inproc:// or loopback tcp://. The embedded pool talks over
 * ipc:// and needs no keys. The secret lives in secure memory only while it
 * is handed to ZeroMQ. Never aborts, never prints. */
#ifndef CLIENT_SECURE_H
#define CLIENT_SECURE_H

#include "client.h"

/* Before connecting sock to options->broker: applies the policy and the keys.
 * Returns FITFARM_OK, or a FITFARM_E* code with the client's error set to a
 * sentence that says what to do. */
int client_secure_socket(fitfarm_client_t *self, void *sock, const fitfarm_options_t *options);

#endif
