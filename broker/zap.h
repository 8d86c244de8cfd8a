/* zap.h: who may talk to the broker. Owns the broker's CURVE key pair, the
 * two allow-lists (clients.allow and workers.allow in the --keys folder), the
 * ZAP handler (ZeroMQ RFC 27) on inproc://zeromq.zap.01, and a monitor of both
 * endpoints that logs failed handshakes (plaintext peers, wrong server key).
 *
 * Roles: each ROUTER carries a ZAP domain ("clients" or "workers"); the
 * handler admits a key only if it is on that domain's list, and answers with
 * the key (Z85) as the ZAP user id. ZeroMQ attaches that user id to every
 * message of the connection, so broker_zap_admitted re-checks each message
 * against the current lists: after a reload (SIGHUP) a removed key's
 * connections stay open but every message on them is dropped. Refusals are
 * logged with the peer's address and key fingerprint, never a secret.
 *
 * The handler runs in the broker's one loop (no thread): the broker polls
 * broker_zap_socket and calls broker_zap_handle. Not here: plaintext mode
 * (no zap object at all) and what a refused worker's jobs become (loop.c). */
#ifndef BROKER_ZAP_H
#define BROKER_ZAP_H

#include <stddef.h>
#include <stdint.h>
#include <zmq.h>

#include "common/keyfile.h"

typedef struct broker_zap broker_zap_t;

/* Reads key_file (the broker's .secret) and keys_dir's two lists, binds the
 * ZAP handler in ctx. Returns a new object (caller destroys) or NULL after
 * logging why (the sentence says how to fix it). */
broker_zap_t *broker_zap_new(void *ctx, const char *key_file, const char *keys_dir);
void broker_zap_destroy(broker_zap_t **self_p);

/* Makes router a CURVE server with the broker's key and ZAP domain role
 * ("clients" or "workers"), and monitors its handshakes. Call before bind.
 * Returns 0 or -1 (logged). */
int broker_zap_secure(broker_zap_t *self, void *router, const char *role);

/* Poll items: the ZAP socket and the two monitors. Fills up to max items
 * (ZMQ_POLLIN) and returns how many. */
int broker_zap_pollitems(broker_zap_t *self, zmq_pollitem_t *items, int max);
/* Answers every waiting ZAP request and logs monitor events. */
void broker_zap_handle(broker_zap_t *self);

/* Reloads both lists; on any error keeps the previous ones (logged).
 * Returns 0 if both loaded. */
int broker_zap_reload(broker_zap_t *self);

/* Is the sender of body (a message received on the role's ROUTER) still on
 * that role's list? Returns 1 yes, 0 no; fp gets the key's fingerprint (or
 * "unknown") for the caller's log line. */
int broker_zap_admitted(const broker_zap_t *self, int workers, zmq_msg_t *body,
                        char fp[COMMON_KEY_FINGERPRINT]);
/* Same for a stored user id (Z85 key text). */
int broker_zap_key_admitted(const broker_zap_t *self, int workers, const char *user_id);

/* Refusals since start, for tests and the stop line. */
uint64_t broker_zap_refused(const broker_zap_t *self);

#endif
