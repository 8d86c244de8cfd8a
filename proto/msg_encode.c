/* msg_encode.c: proto_msg_t -> MessagePack bytes, with msgpack-c's packer.
 *
 * Each message is one array [version, type, fields...] laid out as msg.h
 * lists beside each struct. Integers go through msgpack_pack_uint64, which
 * picks the smallest positive-int form; doubles always through
 * msgpack_pack_double, which always writes float 64 (0xcb + 8 bytes big
 * endian), so every bit of a fitness value survives (NaN payloads, -0.0,
 * subnormals). The encoder refuses values the decoder would refuse for their
 * domain (NULL strings, status, seed mode, cached flag) so that we never send
 * what a peer must drop; it does not apply proto_limits_t, which are the
 * receiver's choice. Not here: decoding (msg_decode.c), freeing (msg_free.c). */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <msgpack.h>

#include "msg.h"
#include "msg_layout.h"

/* Every pack call can fail only when the buffer cannot grow. */
#define PACK(call)                  \
    do {                            \
        if ((call) != 0) {          \
            rc = PROTO_ENOMEM;      \
            goto cleanup;           \
        }                           \
    } while (0)

/* Checks a precondition of the message itself: violations are the caller's
 * misuse, reported as PROTO_EVALUE. */
#define REQUIRE(cond)               \
    do {                            \
        if (!(cond)) {              \
            rc = PROTO_EVALUE;      \
            goto cleanup;           \
        }                           \
    } while (0)

static int s_pack_str(msgpack_packer *pk, const char *s)
{
    if (!s)
        return PROTO_EVALUE;
    size_t n = strlen(s);
    if (n > UINT32_MAX)
        return PROTO_EVALUE;
    return msgpack_pack_str_with_body(pk, s, n) == 0 ? PROTO_OK : PROTO_ENOMEM;
}

static int s_pack_bin(msgpack_packer *pk, const uint8_t *p, size_t n)
{
    if (!p && n > 0)
        return PROTO_EVALUE;
    /* msgpack-c wants a non-NULL body pointer even for zero bytes */
    static const uint8_t s_empty[1] = {0};
    return msgpack_pack_bin_with_body(pk, p ? (const void *)p : (const void *)s_empty, n) == 0
               ? PROTO_OK
               : PROTO_ENOMEM;
}

static int s_pack_f64_array(msgpack_packer *pk, const double *v, uint32_t n)
{
    if (!v && n > 0)
        return PROTO_EVALUE;
    if (msgpack_pack_array(pk, n) != 0)
        return PROTO_ENOMEM;
    for (uint32_t i = 0; i < n; i++)
        if (msgpack_pack_double(pk, v[i]) != 0)
            return PROTO_ENOMEM;
    return PROTO_OK;
}

/* STR and BIN and F64S propagate a helper's code. */
#define STR(s)                                  \
    do {                                        \
        if ((rc = s_pack_str(pk, (s))) != 0)    \
            goto cleanup;                       \
    } while (0)
#define BIN(p, n)                                \
    do {                                         \
        if ((rc = s_pack_bin(pk, (p), (n))) != 0) \
            goto cleanup;                        \
    } while (0)
#define F64S(v, n)                                     \
    do {                                               \
        if ((rc = s_pack_f64_array(pk, (v), (n))) != 0) \
            goto cleanup;                              \
    } while (0)
#define U64(x) PACK(msgpack_pack_uint64(pk, (uint64_t)(x)))
#define BOOL(b) PACK((b) ? msgpack_pack_true(pk) : msgpack_pack_false(pk))

static int s_pack_submit(msgpack_packer *pk, const proto_submit_t *s)
{
    int rc = PROTO_OK;
    REQUIRE(s->seed_mode == PROTO_SEED_GENOME || s->seed_mode == PROTO_SEED_COMMON);
    REQUIRE(s->items || s->n_items == 0);
    STR(s->run_id);
    U64(s->run_seed);
    U64(s->seed_mode);
    U64(s->flags);
    U64(s->timeout_ms);
    U64(s->attempts);
    U64(s->batch_tag);
    STR(s->plugin);
    STR(s->params);
    PACK(msgpack_pack_array(pk, s->n_items));
    for (uint32_t i = 0; i < s->n_items; i++) {
        const proto_item_t *it = &s->items[i];
        PACK(msgpack_pack_array(pk, 3));
        U64(it->tag);
        U64(it->replicate);
        BIN(it->genome, it->genome_len);
    }
    REQUIRE(s->weight <= PROTO_MAX_WEIGHT);
    U64(s->weight ? s->weight : 1);
cleanup:
    return rc;
}

static int s_pack_result(msgpack_packer *pk, const proto_result_t *r)
{
    int rc = PROTO_OK;
    REQUIRE(r->status < PROTO_STATUS_COUNT_);
    REQUIRE(r->cached <= 1);
    PACK(msgpack_pack_array(pk, 12));
    U64(r->tag);
    U64(r->status);
    BOOL(r->cached);
    U64(r->seed);
    BIN(r->key, PROTO_KEY_BYTES);
    F64S(r->fitness, r->n_fitness);
    STR(r->error);
    STR(r->worker);
    STR(r->host);
    PACK(msgpack_pack_double(pk, r->cpu_seconds));
    U64(r->peak_rss_kb);
    PACK(msgpack_pack_double(pk, r->finished_at));
cleanup:
    return rc;
}

static int s_pack_status(msgpack_packer *pk, const proto_status_t *st)
{
    int rc = PROTO_OK;
    REQUIRE(st->workers || st->n_workers == 0);
    REQUIRE(st->runs || st->n_runs == 0);
    REQUIRE(st->warnings || st->n_warnings == 0);
    PACK(msgpack_pack_array(pk, st->n_workers));
    for (uint32_t i = 0; i < st->n_workers; i++) {
        const proto_worker_info_t *w = &st->workers[i];
        REQUIRE(w->plugins || w->n_plugins == 0);
        REQUIRE(w->medians || w->n_plugins == 0);
        REQUIRE(isfinite(w->speed) && w->speed >= 0 && w->speed <= PROTO_MAX_SPEED);
        PACK(msgpack_pack_array(pk, 9));
        STR(w->name);
        STR(w->host);
        STR(w->arch);
        U64(w->slots);
        U64(w->busy);
        PACK(msgpack_pack_array(pk, w->n_plugins));
        for (uint32_t j = 0; j < w->n_plugins; j++)
            STR(w->plugins[j]);
        PACK(msgpack_pack_double(pk, w->speed));
        STR(w->state);
        PACK(msgpack_pack_array(pk, w->n_plugins));
        for (uint32_t j = 0; j < w->n_plugins; j++) {
            REQUIRE(isfinite(w->medians[j]) && w->medians[j] >= 0);
            PACK(msgpack_pack_double(pk, w->medians[j]));
        }
    }
    PACK(msgpack_pack_array(pk, st->n_runs));
    for (uint32_t i = 0; i < st->n_runs; i++) {
        const proto_run_info_t *r = &st->runs[i];
        PACK(msgpack_pack_array(pk, 7));
        STR(r->run_id);
        U64(r->queued);
        U64(r->running);
        U64(r->done);
        U64(r->evaluated);
        U64(r->cached);
        U64(r->failed);
    }
    PACK(msgpack_pack_array(pk, st->n_warnings));
    for (uint32_t i = 0; i < st->n_warnings; i++)
        STR(st->warnings[i]);
cleanup:
    return rc;
}

static int s_pack_hello(msgpack_packer *pk, const proto_hello_t *h)
{
    int rc = PROTO_OK;
    REQUIRE(h->plugins || h->n_plugins == 0);
    REQUIRE(isfinite(h->speed) && h->speed >= 0 && h->speed <= PROTO_MAX_SPEED);
    STR(h->name);
    STR(h->host);
    STR(h->arch);
    U64(h->slots);
    PACK(msgpack_pack_array(pk, h->n_plugins));
    for (uint32_t i = 0; i < h->n_plugins; i++) {
        const proto_plugin_info_t *p = &h->plugins[i];
        REQUIRE(p->seed_params || p->n_seed_params == 0);
        PACK(msgpack_pack_array(pk, 7));
        STR(p->name);
        STR(p->version);
        U64(p->objectives);
        U64(p->flags);
        BIN(p->digest, PROTO_DIGEST_BYTES);
        PACK(msgpack_pack_array(pk, p->n_seed_params));
        for (uint32_t j = 0; j < p->n_seed_params; j++)
            STR(p->seed_params[j]);
        STR(p->param_defaults ? p->param_defaults : "");
    }
    PACK(msgpack_pack_double(pk, h->speed));
cleanup:
    return rc;
}

static int s_pack_done(msgpack_packer *pk, const proto_done_t *d)
{
    int rc = PROTO_OK;
    REQUIRE(d->outcomes || d->n_outcomes == 0);
    U64(d->credits);
    PACK(msgpack_pack_array(pk, d->n_outcomes));
    for (uint32_t i = 0; i < d->n_outcomes; i++) {
        const proto_outcome_t *o = &d->outcomes[i];
        REQUIRE(o->status < PROTO_STATUS_COUNT_);
        PACK(msgpack_pack_array(pk, 7));
        U64(o->job_id);
        U64(o->status);
        F64S(o->fitness, o->n_fitness);
        PACK(msgpack_pack_double(pk, o->cpu_seconds));
        U64(o->peak_rss_kb);
        STR(o->error);
        PACK(msgpack_pack_double(pk, o->wall_seconds));
    }
cleanup:
    return rc;
}

static int s_pack_jobs(msgpack_packer *pk, const proto_jobs_t *j)
{
    int rc = PROTO_OK;
    REQUIRE(j->jobs || j->n_jobs == 0);
    PACK(msgpack_pack_array(pk, j->n_jobs));
    for (uint32_t i = 0; i < j->n_jobs; i++) {
        const proto_job_t *job = &j->jobs[i];
        PACK(msgpack_pack_array(pk, 6));
        U64(job->job_id);
        STR(job->plugin);
        STR(job->params);
        U64(job->seed);
        U64(job->timeout_ms);
        BIN(job->genome, job->genome_len);
    }
cleanup:
    return rc;
}

int proto_msg_encode(const proto_msg_t *msg, uint8_t **out, size_t *out_len)
{
    int rc = PROTO_OK;
    msgpack_sbuffer sbuf;
    msgpack_packer packer;
    msgpack_packer *pk = &packer;

    msgpack_sbuffer_init(&sbuf);
    msgpack_packer_init(pk, &sbuf, msgpack_sbuffer_write);
    if (out)
        *out = NULL;
    if (out_len)
        *out_len = 0;
    REQUIRE(msg && out && out_len);
    int nfields = proto_msg_field_count(msg->type);
    REQUIRE(nfields >= 0);

    PACK(msgpack_pack_array(pk, 2 + (size_t)nfields));
    U64(PROTO_VERSION);
    U64(msg->type);
    switch (msg->type) {
    case PROTO_SUBMIT:
        rc = s_pack_submit(pk, &msg->u.submit);
        break;
    case PROTO_ACK: {
        const proto_ack_t *a = &msg->u.ack;
        REQUIRE(a->tags || a->n_tags == 0);
        STR(a->run_id);
        PACK(msgpack_pack_array(pk, a->n_tags));
        for (uint32_t i = 0; i < a->n_tags; i++)
            U64(a->tags[i]);
        break;
    }
    case PROTO_ACCEPTED:
        STR(msg->u.accepted.run_id);
        U64(msg->u.accepted.batch_tag);
        U64(msg->u.accepted.n_accepted);
        break;
    case PROTO_RESULTS: {
        const proto_results_t *r = &msg->u.results;
        REQUIRE(r->results || r->n_results == 0);
        STR(r->run_id);
        PACK(msgpack_pack_array(pk, r->n_results));
        for (uint32_t i = 0; i < r->n_results && rc == PROTO_OK; i++)
            rc = s_pack_result(pk, &r->results[i]);
        break;
    }
    case PROTO_REFUSED:
        U64(msg->u.refused.code);
        U64(msg->u.refused.batch_tag);
        STR(msg->u.refused.run_id);
        STR(msg->u.refused.text);
        BOOL(msg->u.refused.has_tag);
        U64(msg->u.refused.has_tag ? msg->u.refused.tag : 0);
        break;
    case PROTO_STATUS:
        rc = s_pack_status(pk, &msg->u.status);
        break;
    case PROTO_HELLO:
        rc = s_pack_hello(pk, &msg->u.hello);
        break;
    case PROTO_CREDIT:
        U64(msg->u.credit.credits);
        break;
    case PROTO_DONE:
        rc = s_pack_done(pk, &msg->u.done);
        break;
    case PROTO_HAND_BACK: {
        const proto_hand_back_t *hb = &msg->u.hand_back;
        REQUIRE(hb->job_ids || hb->n_jobs == 0);
        STR(hb->reason);
        PACK(msgpack_pack_array(pk, hb->n_jobs));
        for (uint32_t i = 0; i < hb->n_jobs; i++)
            U64(hb->job_ids[i]);
        PACK(hb->draining ? msgpack_pack_true(pk) : msgpack_pack_false(pk));
        break;
    }
    case PROTO_CANCEL: {
        const proto_cancel_t *cn = &msg->u.cancel;
        REQUIRE(cn->job_ids || cn->n_jobs == 0);
        PACK(msgpack_pack_array(pk, cn->n_jobs));
        for (uint32_t i = 0; i < cn->n_jobs; i++)
            U64(cn->job_ids[i]);
        break;
    }
    case PROTO_JOBS:
        rc = s_pack_jobs(pk, &msg->u.jobs);
        break;
    default: /* field-less types */
        break;
    }
    if (rc != PROTO_OK)
        goto cleanup;

    /* Hand the sbuffer's malloc'd block to the caller (msgpack_sbuffer uses
     * malloc/realloc, so free() is right). An empty buffer cannot happen:
     * the array header alone is one byte. */
    *out_len = sbuf.size;
    *out = (uint8_t *)msgpack_sbuffer_release(&sbuf);
cleanup:
    msgpack_sbuffer_destroy(&sbuf);
    return rc;
}
