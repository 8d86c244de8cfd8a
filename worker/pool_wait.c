/* pool_wait.c: the pool's helpers for simple callers (pool.h): freeing a
 * result and waiting for one without a socket of one's own. Uses only the
 * pool's public calls. */
#include "pool.h"

#include <stdlib.h>
#include <zmq.h>

#include "common/clock.h"

void worker_pool_result_clear(worker_pool_result_t *r)
{
    free(r->outcome.fitness);
    free(r->outcome.error);
    r->outcome.fitness = NULL;
    r->outcome.error = NULL;
    r->outcome.n_fitness = 0;
}

size_t worker_pool_wait(worker_pool_t *self, int timeout_ms)
{
    zmq_pollitem_t items[WORKER_POOL_ITEMS];
    int64_t until = common_clock_ms() + timeout_ms;
    while (worker_pool_ready(self) == 0) {
        int64_t left = until - common_clock_ms();
        if (left < 0)
            break;
        long pt = worker_pool_timeout_ms(self);
        if (pt < 0 || pt > left)
            pt = (long)left;
        size_t n = worker_pool_pollitems(self, items, WORKER_POOL_ITEMS);
        int rc = zmq_poll(items, (int)n, pt);
        worker_pool_handle(self, items, rc > 0 ? n : 0);
        if (left == 0)
            break;
    }
    return worker_pool_ready(self);
}
