/* timers.c: the min-heap behind broker_timers_* (see timers.h). Owns the heap
 * array only; the entries belong to their owners. */
#include "timers.h"

#include <assert.h>
#include <stdlib.h>

#include "common/alloc.h"

static int s_before(const broker_timer_t *a, const broker_timer_t *b)
{
    return a->due_ms < b->due_ms || (a->due_ms == b->due_ms && a->order < b->order);
}

static void s_place(broker_timers_t *self, size_t i, broker_timer_t *t)
{
    self->heap[i] = t;
    t->index = i;
}

static void s_up(broker_timers_t *self, size_t i)
{
    broker_timer_t *t = self->heap[i];
    while (i > 0) {
        size_t parent = (i - 1) / 2;
        if (!s_before(t, self->heap[parent]))
            break;
        s_place(self, i, self->heap[parent]);
        i = parent;
    }
    s_place(self, i, t);
}

static void s_down(broker_timers_t *self, size_t i)
{
    broker_timer_t *t = self->heap[i];
    for (;;) {
        size_t c = 2 * i + 1;
        if (c >= self->n)
            break;
        if (c + 1 < self->n && s_before(self->heap[c + 1], self->heap[c]))
            c++;
        if (!s_before(self->heap[c], t))
            break;
        s_place(self, i, self->heap[c]);
        i = c;
    }
    s_place(self, i, t);
}

void broker_timers_init(broker_timers_t *self)
{
    self->heap = NULL;
    self->n = self->cap = 0;
    self->seq = 0;
}

void broker_timers_fini(broker_timers_t *self)
{
    for (size_t i = 0; i < self->n; i++)
        self->heap[i]->index = SIZE_MAX;
    free(self->heap);
    broker_timers_init(self);
}

void broker_timer_init(broker_timer_t *timer, broker_timer_cb *cb, void *arg)
{
    timer->due_ms = 0;
    timer->order = 0;
    timer->index = SIZE_MAX;
    timer->cb = cb;
    timer->arg = arg;
}

int broker_timer_armed(const broker_timer_t *timer)
{
    return timer->index != SIZE_MAX;
}

void broker_timers_cancel(broker_timers_t *self, broker_timer_t *timer)
{
    if (!broker_timer_armed(timer))
        return;
    size_t i = timer->index;
    assert(i < self->n && self->heap[i] == timer);
    timer->index = SIZE_MAX;
    self->n--;
    if (i == self->n)
        return;
    broker_timer_t *last = self->heap[self->n];
    s_place(self, i, last);
    s_up(self, i);
    s_down(self, last->index);
}

void broker_timers_arm(broker_timers_t *self, broker_timer_t *timer, int64_t due_ms)
{
    broker_timers_cancel(self, timer);
    if (self->n == self->cap) {
        self->cap = self->cap ? self->cap * 2 : 8;
        self->heap = common_xrealloc(self->heap, self->cap, sizeof *self->heap);
    }
    timer->due_ms = due_ms;
    timer->order = self->seq++;
    s_place(self, self->n++, timer);
    s_up(self, timer->index);
    assert(broker_timers_check(self));
}

long broker_timers_timeout(const broker_timers_t *self, int64_t now_ms)
{
    if (self->n == 0)
        return -1;
    int64_t d = self->heap[0]->due_ms - now_ms;
    return d < 0 ? 0 : (long)d;
}

int broker_timers_run(broker_timers_t *self, int64_t now_ms)
{
    int fired = 0;
    /* Bounded: a callback re-arming at or before now would otherwise spin. */
    for (size_t budget = self->n; budget > 0 && self->n > 0; budget--) {
        broker_timer_t *t = self->heap[0];
        if (t->due_ms > now_ms)
            break;
        broker_timers_cancel(self, t);
        t->cb(t, t->arg, now_ms);
        fired++;
    }
    return fired;
}

int broker_timers_check(const broker_timers_t *self)
{
    for (size_t i = 0; i < self->n; i++) {
        if (self->heap[i]->index != i)
            return 0;
        if (i > 0 && s_before(self->heap[i], self->heap[(i - 1) / 2]))
            return 0;
    }
    return 1;
}
