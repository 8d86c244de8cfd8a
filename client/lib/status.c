/* status.c: the public pool-status snapshot (fitfarm_status_*): a STATUS
 * message from the broker, asked for and waited on by client.c, read through
 * size-checked getters so the caller never sees the wire structs.
 *
 * Not here: asking the broker (client_status in client.c). */
#include <stdlib.h>
#include <string.h>

#include "client.h"

struct fitfarm_status {
    proto_msg_t *msg; /* PROTO_STATUS, owned */
};

/* Copies a filled full-size struct into the caller's, as far as its size says. */

FITFARM_API int fitfarm_status_get(fitfarm_client_t *client, int timeout_ms,
                                   fitfarm_status_t **out)
{
    if (!out)
        return FITFARM_EINVAL;
    *out = NULL;
    if (!client)
        return FITFARM_EINVAL;
    fitfarm_status_t *self = calloc(1, sizeof *self);
    if (!self)
        return client_fail(client, FITFARM_ENOMEM, "out of memory reading the status");
    int rc = client_status(client, &self->msg, timeout_ms);
    if (rc != FITFARM_OK) {
        free(self);
        return rc;
    }
    *out = self;
    return FITFARM_OK;
}

FITFARM_API void fitfarm_status_destroy(fitfarm_status_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    proto_msg_destroy(&(*self_p)->msg);
    free(*self_p);
    *self_p = NULL;
}

FITFARM_API size_t fitfarm_status_n_workers(const fitfarm_status_t *self)
{
    return self ? self->msg->u.status.n_workers : 0;
}

FITFARM_API int fitfarm_status_worker(const fitfarm_status_t *self, size_t i,
                                      fitfarm_worker_info_t *out)
{
    if (!self || !out || out->size == 0 || i >= self->msg->u.status.n_workers)
        return FITFARM_EINVAL;
    const proto_worker_info_t *w = &self->msg->u.status.workers[i];
    fitfarm_worker_info_t full = {.size = out->size,
                                  .name = w->name,
                                  .host = w->host,
                                  .arch = w->arch,
                                  .slots = w->slots,
                                  .busy = w->busy,
                                  .n_plugins = w->n_plugins,
                                  .plugins = (const char *const *)w->plugins,
                                  .speed = w->speed,
                                  .state = w->state,
                                  .median_seconds = w->medians};
    CLIENT_COPY_OUT(out, full);
    return FITFARM_OK;
}

FITFARM_API size_t fitfarm_status_n_runs(const fitfarm_status_t *self)
{
    return self ? self->msg->u.status.n_runs : 0;
}

FITFARM_API int fitfarm_status_run(const fitfarm_status_t *self, size_t i, fitfarm_run_info_t *out)
{
    if (!self || !out || out->size == 0 || i >= self->msg->u.status.n_runs)
        return FITFARM_EINVAL;
    const proto_run_info_t *r = &self->msg->u.status.runs[i];
    fitfarm_run_info_t full = {.size = out->size,
                               .run_id = r->run_id,
                               .queued = r->queued,
                               .running = r->running,
                               .done = r->done,
                               .evaluated = r->evaluated,
                               .cached = r->cached,
                               .failed = r->failed};
    CLIENT_COPY_OUT(out, full);
    return FITFARM_OK;
}

FITFARM_API size_t fitfarm_status_n_warnings(const fitfarm_status_t *self)
{
    return self ? self->msg->u.status.n_warnings : 0;
}

FITFARM_API const char *fitfarm_status_warning(const fitfarm_status_t *self, size_t i)
{
    if (!self || i >= self->msg->u.status.n_warnings)
        return NULL;
    return self->msg->u.status.warnings[i];
}
