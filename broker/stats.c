/* stats.c: the histogram, refusal counts and connection counts of stats.h. */
#include "stats.h"

#include <math.h>
#include <zmq.h>

#include "msg.h"

const double broker_hist_bounds[BROKER_HIST_BUCKETS] = {0.0005, 0.001, 0.0025, 0.005,
                                                          0.01,   0.025, 0.05,   0.1,
                                                          0.25,   0.5,   1.0,    2.5};

void broker_hist_observe(broker_hist_t *h, double seconds)
{
    if (!isfinite(seconds) || seconds < 0)
        seconds = 0;
    int i = 0;
    while (i < BROKER_HIST_BUCKETS && seconds > broker_hist_bounds[i])
        i++; /* Prometheus buckets count values <= le */
    h->in_bucket[i]++;
    h->count++;
    h->sum += seconds;
}

void broker_stats_refused(broker_stats_t *self, uint32_t code)
{
    self->refused[code < BROKER_STATS_REFUSE_CODES ? code : 0]++;
}

const char *broker_stats_refuse_label(uint32_t code)
{
    switch (code) {
    case PROTO_REFUSE_BAD_MESSAGE:
        return "bad_message";
    case PROTO_REFUSE_UNKNOWN_PLUGIN:
        return "unknown_plugin";
    case PROTO_REFUSE_BAD_PARAMS:
        return "bad_params";
    case PROTO_REFUSE_QUEUE_FULL:
        return "queue_full";
    case PROTO_REFUSE_NOT_RECORDED:
        return "not_recorded";
    case PROTO_REFUSE_SHUTTING_DOWN:
        return "shutting_down";
    case PROTO_REFUSE_RUN_MISMATCH:
        return "run_mismatch";
    case PROTO_REFUSE_STORE:
        return "store_failing";
    case PROTO_REFUSE_NOT_PERMITTED:
        return "not_permitted";
    default:
        return NULL;
    }
}

static uint64_t s_open[2];

void broker_stats_connection_event(int role, uint16_t event)
{
    if (role != BROKER_STATS_CLIENTS && role != BROKER_STATS_WORKERS)
        return;
    if (event == ZMQ_EVENT_ACCEPTED)
        s_open[role]++;
    else if (event == ZMQ_EVENT_DISCONNECTED && s_open[role] > 0)
        s_open[role]--;
}

void broker_stats_connections_reset(void)
{
    s_open[0] = s_open[1] = 0;
}

uint64_t broker_stats_connections(int role)
{
    return role == BROKER_STATS_CLIENTS || role == BROKER_STATS_WORKERS ? s_open[role] : 0;
}
