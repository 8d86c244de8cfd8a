/* worker_io.h: the workers endpoint. Decodes what workers send (HELLO,
 * CREDIT, DONE, BYE, HEARTBEAT), keeps the registry in step, answers unknown
 * routing ids with REHELLO, and runs the two worker timers: the heartbeat
 * tick (HEARTBEAT to every worker) and the liveness sweep (drop the silent).
 * Not here: job selection and completion (dispatch.c). */
#ifndef BROKER_WORKER_IO_H
#define BROKER_WORKER_IO_H

#include <stddef.h>
#include <stdint.h>

#include "core.h"

/* One body from routing id rid on the workers socket. Never fails. */
void broker_worker_on_message(broker_t *b, const uint8_t *rid, size_t rid_len, const uint8_t *body,
                              size_t len);
/* Registers a worker from a decoded HELLO (exposed for unit tests). */
broker_worker_t *broker_worker_on_hello(broker_t *b, const uint8_t *rid, size_t rid_len,
                                        const proto_hello_t *h);
/* Arms the heartbeat tick; the liveness sweep arms itself on first HELLO. */
void broker_worker_timers_start(broker_t *b);

#endif
