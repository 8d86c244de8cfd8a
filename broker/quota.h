/* quota.h: caps on queued work, so that no run and no client can fill the
 * broker's memory. "Queued" means accepted and not yet answered (a run's
 * outstanding requests). A SUBMIT that would pass the run's cap or its client
 * connection's cap (summed over the runs that connection last spoke for) is
 * refused whole with PROTO_REFUSE_QUEUE_FULL and a sentence giving the
 * numbers, never dropped silently. Not here: decoder size limits (the proto
 * limits in broker_t, applied by the decoder). */
#ifndef BROKER_QUOTA_H
#define BROKER_QUOTA_H

#include <stddef.h>
#include <stdint.h>

#include "core.h"

/* 0 if n_items more requests fit for run (NULL: a new run) from client rid;
 * else -1 with the reason in text. */
int broker_quota_check(const broker_t *b, const uint8_t *rid, size_t rid_len,
                       const broker_run_t *run, uint32_t n_items, char *text, size_t n);

#endif
