/* stats.h: counters the broker keeps only for its metrics page (metrics.c):
 * a latency histogram type (the store's commit times), refusals by code, and
 * the connections open on each endpoint (from libzmq's monitor events, which
 * zap.c or fdreserve.c read). Internal to the broker. Not here: the counts
 * that `fitfarm status` shows (status.h), which the page reads as they are. */
#ifndef BROKER_STATS_H
#define BROKER_STATS_H

#include <stdint.h>

/* Upper bounds in seconds, ascending; one more bucket (+Inf) follows. From
 * half a millisecond (a commit without fsync) to 2.5 s (a disk in trouble):
 * a commit of one turn took about 620 us with fsync on our machines (store.c). */
#define BROKER_HIST_BUCKETS 12
extern const double broker_hist_bounds[BROKER_HIST_BUCKETS];

typedef struct {
    uint64_t in_bucket[BROKER_HIST_BUCKETS + 1]; /* per bucket, not cumulative; last +Inf */
    uint64_t count;
    double sum; /* seconds */
} broker_hist_t;

/* Counts one observation (negative or non-finite count as 0). */
void broker_hist_observe(broker_hist_t *h, double seconds);

#define BROKER_STATS_REFUSE_CODES 16 /* proto_refuse_t fits; [0] counts unknown codes */

typedef struct {
    uint64_t refused[BROKER_STATS_REFUSE_CODES]; /* REFUSED messages sent, by code */
} broker_stats_t;

/* Counts one REFUSED message with code (proto_refuse_t). */
void broker_stats_refused(broker_stats_t *self, uint32_t code);

/* Our own label for a refusal code ("unknown_plugin", ...); NULL for codes
 * with none. */
const char *broker_stats_refuse_label(uint32_t code);

enum { BROKER_STATS_CLIENTS = 0, BROKER_STATS_WORKERS = 1 };

/* A libzmq monitor event (ZMQ_EVENT_*) on the clients or workers endpoint:
 * ACCEPTED opens a connection, DISCONNECTED closes one (libzmq reports it
 * for every accepted connection that ends, a failed handshake included).
 * Other events are ignored. One broker per process: file-static counts,
 * zeroed by broker_stats_connections_reset. */
void broker_stats_connection_event(int role, uint16_t event);
void broker_stats_connections_reset(void);
/* Connections open now on role's endpoint (handshakes under way included). */
uint64_t broker_stats_connections(int role);

#endif
