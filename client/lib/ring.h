/* ring.h: growing a ring buffer of fixed-size elements (the client's outbox
 * of messages, a run's queue of ready results). Internal, not API. */
#ifndef CLIENT_RING_H
#define CLIENT_RING_H

#include <stddef.h>

/* Makes room for one more element in the ring *buf (capacity *cap, first
 * element at *head, len elements): when full, moves it into a buffer twice
 * as large (first_cap the first time), in order from index 0. Returns 0, or
 * -1 on out of memory with the ring unchanged. */
int client_ring_reserve(void **buf, size_t *cap, size_t *head, size_t len, size_t elem,
                        size_t first_cap);

#endif
