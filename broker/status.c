/* status.c: the snapshot behind `fitfarm status` and the listener's pages
 * (status.h). Reads the registry, the runs and the warnings; changes nothing. */
#include "status.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "access.h"
#include "common/alloc.h"

void broker_status_fill(broker_t *b, const char *who, int every_run, proto_status_t *st)
{
    memset(st, 0, sizeof *st);
    st->n_workers = b->registry.n;
    st->workers = common_xcalloc(st->n_workers ? st->n_workers : 1, sizeof *st->workers);
    uint32_t i = 0;
    for (broker_worker_t *w = b->registry.seen_head; w && i < st->n_workers;
         w = w->seen_next, i++) {
        proto_worker_info_t *wi = &st->workers[i];
        wi->name = w->name;
        wi->host = w->host;
        wi->arch = w->arch;
        wi->slots = w->slots;
        /* Running, not prefetched: a worker starts a job as soon as a slot
         * is free, so at most slots of the jobs it holds are running. */
        uint32_t busy = w->held + w->copies;
        wi->busy = busy < w->slots ? busy : w->slots;
        wi->speed = w->speed;
        wi->state = w->state;
        wi->n_plugins = w->n_plugins;
        wi->plugins = common_xcalloc(w->n_plugins ? w->n_plugins : 1, sizeof *wi->plugins);
        wi->medians = common_xcalloc(w->n_plugins ? w->n_plugins : 1, sizeof *wi->medians);
        for (uint32_t k = 0; k < w->n_plugins; k++) {
            double m = broker_timing_median(&w->timing[k], 1);
            wi->medians[k] = m > 0 ? m : 0;
            size_t n = strlen(w->plugins[k]->name) + strlen(w->plugins[k]->version) + 2;
            wi->plugins[k] = common_xmalloc(n);
            snprintf(wi->plugins[k], n, "%s@%s", w->plugins[k]->name, w->plugins[k]->version);
        }
    }
    st->n_workers = i;
    size_t n_runs = broker_table_size(b->runs.by_id);
    if (n_runs > PROTO_MAX_LIST)
        n_runs = PROTO_MAX_LIST; /* the decoder's cap; the oldest extra runs are left out */
    st->runs = common_xcalloc(n_runs ? n_runs : 1, sizeof *st->runs);
    size_t cur = 0;
    broker_run_t *run;
    while (st->n_runs < n_runs && (run = broker_table_next(b->runs.by_id, &cur))) {
        if (!every_run) {
            broker_access_t access = broker_access_may_use(b, run, who);
            if (access == BROKER_ACCESS_NO || access == BROKER_ACCESS_CLAIM)
                continue;
        }
        proto_run_info_t *ri = &st->runs[st->n_runs++];
        ri->run_id = run->id;
        ri->queued = run->n_queued;
        ri->running = run->n_running;
        ri->done = broker_runs_durable_answered(&b->runs, run); /* only what the store holds */
        ri->evaluated = run->n_evaluated;
        ri->cached = run->n_cached;
        ri->failed = run->n_failed;
    }
    /* Plugin versions with queued jobs in any run (not only those this key
     * may see: the warning names a plugin, not a run): one nobody offers is
     * worth a warning. */
    uint8_t *wanted = common_xcalloc(b->catalog.n ? b->catalog.n : 1, 1);
    cur = 0;
    while ((run = broker_table_next(b->runs.by_id, &cur)))
        for (uint32_t q = 0; q < run->n_queues; q++)
            if (run->queues[q].head)
                wanted[run->queues[q].plugin->id] = 1;
    st->n_warnings = broker_catalog_warnings(&b->catalog, wanted, &st->warnings, 0);
    free(wanted);
    if (broker_store_failing(b->store)) {
        char text[1200];
        broker_store_describe(b->store, text, sizeof text);
        st->warnings = common_xrealloc(st->warnings, (size_t)st->n_warnings + 1,
                                       sizeof *st->warnings);
        st->warnings[st->n_warnings++] = common_xstrdup(text);
    }
}

void broker_status_clear(proto_status_t *st)
{
    for (uint32_t i = 0; i < st->n_workers; i++) {
        for (uint32_t k = 0; k < st->workers[i].n_plugins; k++)
            free(st->workers[i].plugins[k]);
        free(st->workers[i].plugins);
        free(st->workers[i].medians);
    }
    free(st->workers);
    free(st->runs);
    for (uint32_t i = 0; i < st->n_warnings; i++)
        free(st->warnings[i]);
    free(st->warnings);
    memset(st, 0, sizeof *st);
}
