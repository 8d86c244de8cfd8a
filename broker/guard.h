/* guard.h: the broker's admission policy around its loop: at start, plaintext
 * only by asking and only on local endpoints, else CURVE with keys and
 * allow-lists (zap.h); per message, the sender's key must still be on its
 * role's list; on SIGHUP, the lists and the run share list reload, registered
 * workers whose key was removed are dropped (their jobs re-queued), and
 * clients whose key was removed are cut off from their runs (access.h). Also applies the
 * configured limits. Not here: the ZAP protocol itself (zap.c). */
#ifndef BROKER_GUARD_H
#define BROKER_GUARD_H

#include <stddef.h>
#include <stdint.h>
#include <zmq.h>

#include "broker.h"
#include "core.h"
#include "zap.h"

/* Applies config's limits to b and, unless config->insecure, starts the ZAP
 * handler (b->zap) in b->ctx. Refuses (logs why and how to fix it, returns
 * -1) plaintext on a non-local endpoint and CURVE without keys. Call after
 * the context exists and before binding. */
int broker_guard_start(broker_t *b, const broker_config_t *config);
/* Secures router (role "clients" or "workers") and sets its message cap.
 * Call before bind. Returns 0 or -1 (logged). */
int broker_guard_socket(broker_t *b, void *router, const char *role);
/* 1 if the message may be handled; 0 if it was from a key no longer admitted
 * (logged, counted; a registered worker with that key is dropped). Records
 * the key of a registered worker for broker_guard_reload. */
int broker_guard_admit(broker_t *b, int workers, const uint8_t *rid, size_t rid_len,
                       zmq_msg_t *body);
/* After a worker message was handled: remember its key on its registration. */
void broker_guard_note_worker(broker_t *b, const uint8_t *rid, size_t rid_len, zmq_msg_t *body);
/* SIGHUP: reload the lists, drop workers whose key went. No-op in plaintext. */
void broker_guard_reload(broker_t *b);
/* Frees the ZAP handler (before the context terminates). */
void broker_guard_stop(broker_t *b);

#endif
