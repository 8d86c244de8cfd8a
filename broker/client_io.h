/* client_io.h: the clients endpoint. Decodes what clients send (SUBMIT, ACK,
 * STATUS_REQ, HEARTBEAT), validates a SUBMIT and turns its items into waiting
 * requests (recomputing every seed and key), and flushes the turn's ACCEPTED
 * replies and batched RESULTS after the store commit. Not here: workers,
 * dispatch. */
#ifndef BROKER_CLIENT_IO_H
#define BROKER_CLIENT_IO_H

#include <stddef.h>
#include <stdint.h>

#include "core.h"

/* One body from routing id rid on the clients socket; user_id is the ZAP
 * user id ZeroMQ attached to it (the sender's Z85 key; NULL in plaintext).
 * Never fails: bad input is logged and dropped, refusals are answered. Which
 * runs the sender may use is access.h's. */
void broker_client_on_message(broker_t *b, const uint8_t *rid, size_t rid_len,
                              const char *user_id, const uint8_t *body, size_t len);
/* Handles a decoded SUBMIT from identity who (broker_access_who; exposed for
 * unit tests; with b->clients NULL nothing is sent). Returns 0 if accepted,
 * else the proto_refuse_t code. */
int broker_client_submit(broker_t *b, const uint8_t *rid, size_t rid_len, const char *who,
                         const proto_submit_t *s);
/* Before-sleep, after the store commit: ACCEPTED replies, then RESULTS per
 * run in messages of many results. */
void broker_client_flush(broker_t *b);
/* The turn's commit failed: each client whose batch was taken in this turn
 * (and waits for ACCEPTED, held until a commit succeeds) is told the store's
 * reason once, as a refusal, instead of waiting out its time-out. The
 * batch's requests stay in the store's write log: they are written and
 * evaluated when the store recovers, so resuming the run answers them. */
void broker_client_tell_store_failing(broker_t *b);

#endif
