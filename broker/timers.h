/* timers.h: the broker's one ordered timer structure, a binary min-heap of
 * intrusive timer entries ordered by due time (ties by arming order).
 *
 * Timers are few and long-lived (heartbeat tick, liveness sweep): the entry
 * lives in its owner's struct, so arming allocates nothing. Per-worker
 * deadlines are not timers: the registry keeps workers ordered by last-seen
 * time and one liveness timer follows the oldest (see registry.h). Not here:
 * clocks (the caller passes now_ms), sockets. */
#ifndef BROKER_TIMERS_H
#define BROKER_TIMERS_H

#include <stddef.h>
#include <stdint.h>

typedef struct broker_timer broker_timer_t;
typedef void(broker_timer_cb)(broker_timer_t *timer, void *arg, int64_t now_ms);

struct broker_timer {
    int64_t due_ms;
    uint64_t order; /* arming sequence: equal due times fire first-armed first */
    size_t index;   /* position in the heap; SIZE_MAX when not armed */
    broker_timer_cb *cb;
    void *arg;
};

typedef struct {
    broker_timer_t **heap;
    size_t n, cap;
    uint64_t seq;
} broker_timers_t;

void broker_timers_init(broker_timers_t *self);
void broker_timers_fini(broker_timers_t *self); /* disarms nothing; frees the heap */

/* Prepares an entry (not armed). */
void broker_timer_init(broker_timer_t *timer, broker_timer_cb *cb, void *arg);
/* Arms timer at due_ms, re-arming it if already armed. */
void broker_timers_arm(broker_timers_t *self, broker_timer_t *timer, int64_t due_ms);
/* Disarms timer if armed. */
void broker_timers_cancel(broker_timers_t *self, broker_timer_t *timer);
int broker_timer_armed(const broker_timer_t *timer);

/* Milliseconds until the nearest timer (0 if overdue), or -1 if none is armed:
 * the zmq_poll time-out. */
long broker_timers_timeout(const broker_timers_t *self, int64_t now_ms);
/* Fires every timer due at now_ms, earliest first; each is disarmed before its
 * callback, which may re-arm it. Returns how many fired. */
int broker_timers_run(broker_timers_t *self, int64_t now_ms);

int broker_timers_check(const broker_timers_t *self);

#endif
