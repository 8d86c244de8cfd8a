/* envelope.h: ROUTER framing. Every message on the broker's sockets is the
 * peer's routing id frame, then exactly one body frame (no empty delimiter).
 * Receives without blocking, drops malformed envelopes with one log line, and
 * sends encoded proto messages without copying the body. Not here: decoding
 * bodies (proto/msg.h), what messages mean. */
#ifndef BROKER_ENVELOPE_H
#define BROKER_ENVELOPE_H

#include <stddef.h>
#include <stdint.h>
#include <zmq.h>

#include "msg.h"
#include "registry.h"

#define BROKER_RID_HEX 36 /* hex of up to 16 routing id bytes, "…" and NUL */

/* Receives one envelope without blocking. Returns 1 with rid/rid_len and body
 * filled (caller closes body with zmq_msg_close), 0 when nothing waits, -1
 * when a malformed envelope was consumed and logged (role names the socket). */
int broker_envelope_recv(void *sock, const char *role, uint8_t rid[BROKER_RID_MAX],
                         size_t *rid_len, zmq_msg_t *body);
/* Encodes msg and sends it to rid. Returns 0, or -1 (logged) if encoding
 * failed or ZeroMQ refused; a peer that has gone is silently skipped. */
int broker_envelope_send(void *sock, const uint8_t *rid, size_t rid_len, const proto_msg_t *msg);
/* Sends an already encoded body (copied by ZeroMQ). */
int broker_envelope_send_raw(void *sock, const uint8_t *rid, size_t rid_len, const void *body,
                             size_t len);
/* Short lower-case hex of a routing id for log lines. Returns out. */
const char *broker_rid_hex(const uint8_t *rid, size_t rid_len, char out[BROKER_RID_HEX]);

#endif
