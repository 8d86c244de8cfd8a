/* store.c: the in-memory stand-in for the durable store (see store.h). It
 * owns nothing but counters; durability comes in a later step. */
#include "store.h"

#include <stdlib.h>

#include "common/alloc.h"
#include "common/log.h"

struct broker_store {
    uint64_t pending; /* notes since the last commit */
    uint64_t commits;
};

broker_store_t *broker_store_open(const char *dir)
{
    if (dir)
        LOG_INFO("store folder %s accepted; this build keeps results in memory only "
                 "(durability comes in a later version)",
                 dir);
    return common_xcalloc(1, sizeof(broker_store_t));
}

void broker_store_close(broker_store_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    free(*self_p);
    *self_p = NULL;
}

void broker_store_note_request(broker_store_t *self, const broker_run_t *run, uint64_t tag,
                               const broker_eval_t *e)
{
    (void)run;
    (void)tag;
    (void)e;
    self->pending++;
}

void broker_store_note_result(broker_store_t *self, const broker_eval_t *e)
{
    (void)e;
    self->pending++;
}

int broker_store_commit(broker_store_t *self)
{
    if (self->pending) {
        self->pending = 0;
        self->commits++;
    }
    return 0;
}
