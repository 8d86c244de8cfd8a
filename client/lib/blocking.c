/* blocking.c: the thin blocking calls of the public API (evaluate, submit,
 * poll) over the core (run.c, batch.c: no I/O) and the transport (client.c:
 * the socket, the pump, the outbox). Every wait here has the caller's
 * explicit time-out and wakes at least every 500 ms to look at the embedded
 * pool and at answers that came in the background.
 *
 * Not here: what a message means (run.c), sockets (client.c). */
#include "batch.h"
#include "client.h"
#include "run.h"

/* One turn of waiting: sends what is queued, handles what arrived, and
 * checks that an embedded pool is still alive. */
static int s_wait_turn(fitfarm_client_t *cl, int wait_ms)
{
    int rc = client_pump(cl, wait_ms);
    if (rc >= 0 && cl->pool)
        rc = client_pool_check(cl->pool, cl->core.err, sizeof cl->core.err);
    return rc < 0 ? rc : 0;
}

/* Sends the batch's unsent slots and waits until deadline for every chunk's
 * answer. no_wait: return once handed to the socket. On a time-out (or
 * no_wait) the unanswered chunks stay registered, detached: their answers
 * are handled in the background (a refusal is reported by the next poll or
 * evaluate). again: a batch already submitted is not an error. */
static int s_submit(fitfarm_run_t *run, fitfarm_batch_t *b, int streaming, int64_t deadline,
                    int no_wait, int again)
{
    fitfarm_client_t *cl = run->client;
    int rc = client_run_submit_start(run, b, streaming, again);
    if (rc != FITFARM_OK && rc != FITFARM_ENOMEM)
        return rc; /* misuse: nothing was registered */
    if (rc == FITFARM_OK)
        rc = client_flush(cl, 0);
    while (rc == FITFARM_OK && !no_wait && client_run_submit_pending(run, b)) {
        int left = client_ms_left(deadline);
        if (left == 0) {
            rc = client_fail(cl, FITFARM_ETIMEDOUT,
                             "the broker at %s did not accept the batch in time", cl->endpoint);
            break;
        }
        rc = s_wait_turn(cl, left < 0 || left > 200 ? 200 : left);
        if (!run->client)
            return FITFARM_EINVAL;
    }
    return client_run_submit_finish(run, b, rc);
}

/* A batch larger than the broker's queue cap for its run: the part the
 * broker took is evaluated, and the rest is sent again every
 * CLIENT_QUEUE_RETRY_MS while that part drains the queue. Only while some
 * of this batch is still in the broker's hands: a queue full of other
 * work is the caller's to judge, and FITFARM_EQUEUEFULL says so. */
#define CLIENT_QUEUE_RETRY_MS 200

static int s_queue_wait_helps(int rc, const fitfarm_batch_t *batch)
{
    return rc == FITFARM_EQUEUEFULL && client_batch_in_flight(batch) > 0;
}

FITFARM_API int fitfarm_evaluate(fitfarm_run_t *run, fitfarm_batch_t *batch,
                                 fitfarm_progress_cb progress, void *arg, int timeout_ms)
{
    if (!run || !run->client || !batch)
        return FITFARM_EINVAL;
    fitfarm_client_t *cl = run->client;
    int64_t deadline = client_deadline(timeout_ms);
    int rc = s_submit(run, batch, 0, deadline, 0, 1);
    int64_t resend_at = 0; /* > 0: part of the batch waits for room in the queue */
    if (s_queue_wait_helps(rc, batch))
        resend_at = client_deadline(CLIENT_QUEUE_RETRY_MS);
    else if (rc != FITFARM_OK)
        return rc;
    size_t total = fitfarm_batch_size(batch) * fitfarm_batch_replicates(batch);
    size_t reported = (size_t)-1;
    while (fitfarm_batch_arrived(batch) < total) {
        if (resend_at > 0 && client_ms_left(resend_at) == 0) {
            rc = s_submit(run, batch, 0, deadline, 0, 1);
            if (rc == FITFARM_OK)
                resend_at = 0;
            else if (s_queue_wait_helps(rc, batch))
                resend_at = client_deadline(CLIENT_QUEUE_RETRY_MS);
            else
                return rc;
        }
        size_t arrived = fitfarm_batch_arrived(batch);
        if (progress && reported != arrived) {
            reported = arrived;
            progress(arrived, total, arg);
        }
        rc = client_run_take_async(run);
        if (rc != 0)
            return rc;
        int left = client_ms_left(deadline);
        if (left == 0)
            return client_fail(cl, FITFARM_ETIMEDOUT, "%zu of %zu results arrived within %d ms",
                               arrived, total, timeout_ms);
        int wait = left < 0 || left > 500 ? 500 : left;
        if (resend_at > 0 && client_ms_left(resend_at) < wait)
            wait = client_ms_left(resend_at);
        rc = s_wait_turn(cl, wait);
        if (rc < 0)
            return rc;
        if (!run->client || batch->run != run)
            return FITFARM_EINVAL;
    }
    if (progress && reported != total)
        progress(total, total, arg);
    return FITFARM_OK;
}

FITFARM_API int fitfarm_submit(fitfarm_run_t *run, fitfarm_batch_t *batch, int timeout_ms)
{
    if (!run || !run->client || !batch)
        return FITFARM_EINVAL;
    return s_submit(run, batch, 1, client_deadline(timeout_ms), timeout_ms == 0, 0);
}

FITFARM_API int fitfarm_poll(fitfarm_run_t *run, fitfarm_result_t *out, int timeout_ms)
{
    if (!run || !run->client || !out || out->size == 0)
        return FITFARM_EINVAL;
    int64_t deadline = client_deadline(timeout_ms);
    for (;;) {
        if (client_run_next_ready(run, out))
            return 1;
        int rc = client_run_take_async(run);
        if (rc != 0)
            return rc;
        int left = client_ms_left(deadline);
        if (left == 0) {
            /* Just looking (0) still takes in what already arrived. */
            if (timeout_ms == 0 && (rc = s_wait_turn(run->client, 0)) == 0 &&
                client_run_next_ready(run, out))
                return 1;
            return rc < 0 ? rc : 0;
        }
        rc = s_wait_turn(run->client, left < 0 || left > 500 ? 500 : left);
        if (rc < 0)
            return rc;
        if (!run->client)
            return FITFARM_EINVAL;
    }
}
