/* msg_free.c: releases a proto_msg_t and everything it points to. Works on
 * partly filled messages (the decoder's failure path): every array is
 * allocated zeroed and its count set only together with the allocation, so
 * NULL pointers and counts always agree. Not here: building messages. */
#include <stdlib.h>

#include "msg.h"

static void s_free_result(proto_result_t *r)
{
    free(r->fitness);
    free(r->error);
    free(r->worker);
    free(r->host);
}

static void s_free_worker_info(proto_worker_info_t *w)
{
    free(w->name);
    free(w->host);
    free(w->arch);
    free(w->state);
    free(w->medians);
    if (w->plugins)
        for (uint32_t i = 0; i < w->n_plugins; i++)
            free(w->plugins[i]);
    free(w->plugins);
}

static void s_free_outcome(proto_outcome_t *o)
{
    free(o->fitness);
    free(o->error);
}

static void s_free_job(proto_job_t *j)
{
    free(j->plugin);
    free(j->params);
    free(j->genome);
}

void proto_msg_destroy(proto_msg_t **msg_p)
{
    if (!msg_p || !*msg_p)
        return;
    proto_msg_t *m = *msg_p;
    switch (m->type) {
    case PROTO_SUBMIT: {
        proto_submit_t *s = &m->u.submit;
        free(s->run_id);
        free(s->plugin);
        free(s->params);
        if (s->items)
            for (uint32_t i = 0; i < s->n_items; i++)
                free(s->items[i].genome);
        free(s->items);
        break;
    }
    case PROTO_ACK:
        free(m->u.ack.run_id);
        free(m->u.ack.tags);
        break;
    case PROTO_ACCEPTED:
        free(m->u.accepted.run_id);
        break;
    case PROTO_RESULTS: {
        proto_results_t *r = &m->u.results;
        free(r->run_id);
        if (r->results)
            for (uint32_t i = 0; i < r->n_results; i++)
                s_free_result(&r->results[i]);
        free(r->results);
        break;
    }
    case PROTO_REFUSED:
        free(m->u.refused.run_id);
        free(m->u.refused.text);
        break;
    case PROTO_STATUS: {
        proto_status_t *st = &m->u.status;
        if (st->workers)
            for (uint32_t i = 0; i < st->n_workers; i++)
                s_free_worker_info(&st->workers[i]);
        free(st->workers);
        if (st->runs)
            for (uint32_t i = 0; i < st->n_runs; i++)
                free(st->runs[i].run_id);
        free(st->runs);
        if (st->warnings)
            for (uint32_t i = 0; i < st->n_warnings; i++)
                free(st->warnings[i]);
        free(st->warnings);
        break;
    }
    case PROTO_HAND_BACK:
        free(m->u.hand_back.reason);
        free(m->u.hand_back.job_ids);
        break;
    case PROTO_CANCEL:
        free(m->u.cancel.job_ids);
        break;
    case PROTO_HELLO: {
        proto_hello_t *h = &m->u.hello;
        free(h->name);
        free(h->host);
        free(h->arch);
        if (h->plugins)
            for (uint32_t i = 0; i < h->n_plugins; i++) {
                free(h->plugins[i].name);
                free(h->plugins[i].version);
                if (h->plugins[i].seed_params)
                    for (uint32_t j = 0; j < h->plugins[i].n_seed_params; j++)
                        free(h->plugins[i].seed_params[j]);
                free(h->plugins[i].seed_params);
                free(h->plugins[i].param_defaults);
            }
        free(h->plugins);
        break;
    }
    case PROTO_DONE: {
        proto_done_t *d = &m->u.done;
        if (d->outcomes)
            for (uint32_t i = 0; i < d->n_outcomes; i++)
                s_free_outcome(&d->outcomes[i]);
        free(d->outcomes);
        break;
    }
    case PROTO_JOBS: {
        proto_jobs_t *j = &m->u.jobs;
        if (j->jobs)
            for (uint32_t i = 0; i < j->n_jobs; i++)
                s_free_job(&j->jobs[i]);
        free(j->jobs);
        break;
    }
    default: /* CREDIT and the field-less types own nothing */
        break;
    }
    free(m);
    *msg_p = NULL;
}
