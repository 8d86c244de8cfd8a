/* quota.c: queued-work caps per run and per client connection (see quota.h).
 * Owns no state: it reads the runs' outstanding counts. */
#include "quota.h"

#include <inttypes.h>
#include <stdio.h>
#include <string.h>

int broker_quota_check(const broker_t *b, const uint8_t *rid, size_t rid_len,
                       const broker_run_t *run, uint32_t n_items, char *text, size_t n)
{
    uint64_t in_run = run ? run->outstanding : 0;
    if (in_run + n_items > b->max_queued_per_run) {
        snprintf(text, n,
                 "queue full: run %s has %" PRIu64 " requests waiting and this batch adds %u; "
                 "the broker's cap is %" PRIu64 " per run (--max-queued-per-run); wait for "
                 "results and submit again",
                 run ? run->id : "(new)", in_run, n_items, b->max_queued_per_run);
        return -1;
    }
    /* Per client connection: O(runs) per SUBMIT, cheap next to validating it. */
    uint64_t in_client = 0;
    size_t cur = 0;
    broker_run_t *r;
    while ((r = broker_table_next(b->runs.by_id, &cur)))
        if (r->client_len == rid_len && memcmp(r->client, rid, rid_len) == 0)
            in_client += r->outstanding;
    if (run && !(run->client_len == rid_len && memcmp(run->client, rid, rid_len) == 0))
        in_client += run->outstanding; /* the run moves to this connection */
    if (in_client + n_items > b->max_queued_per_client) {
        snprintf(text, n,
                 "queue full: this client has %" PRIu64 " requests waiting and this batch "
                 "adds %u; the broker's cap is %" PRIu64 " per client "
                 "(--max-queued-per-client); wait for results and submit again",
                 in_client, n_items, b->max_queued_per_client);
        return -1;
    }
    return 0;
}
