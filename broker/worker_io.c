/* worker_io.c: the workers endpoint and its timers (see worker_io.h and the
 * registration lifecycle in registry.h). Owns no state of its own. */
#include "worker_io.h"

#include <stdio.h>
#include <string.h>

#include "common/log.h"
#include "dispatch.h"
#include "envelope.h"

static void s_send_simple(broker_t *b, const uint8_t *rid, size_t rid_len, uint32_t type)
{
    if (!b->workers)
        return;
    proto_msg_t msg = {.type = type};
    broker_envelope_send(b->workers, rid, rid_len, &msg);
}

static void s_arm_liveness(broker_t *b)
{
    broker_worker_t *oldest = b->registry.seen_head;
    if (oldest)
        broker_timers_arm(&b->timers, &b->liveness_timer,
                          oldest->last_seen_ms + b->liveness_ms);
    else
        broker_timers_cancel(&b->timers, &b->liveness_timer);
}

static void s_liveness_cb(broker_timer_t *t, void *arg, int64_t now_ms)
{
    (void)t;
    broker_t *b = arg;
    broker_worker_t *w;
    while ((w = b->registry.seen_head) && w->last_seen_ms + b->liveness_ms <= now_ms) {
        char name[PROTO_MAX_NAME_BYTES + 1];
        snprintf(name, sizeof name, "%s", w->name);
        double silent = (double)(now_ms - w->last_seen_ms) / 1000.0;
        uint32_t n = broker_dispatch_lose_worker(b, w);
        LOG_INFO("worker %s left: silent for %.1f s; re-queued %u jobs", name, silent, n);
    }
    s_arm_liveness(b);
}

static void s_heartbeat_cb(broker_timer_t *t, void *arg, int64_t now_ms)
{
    broker_t *b = arg;
    for (broker_worker_t *w = b->registry.seen_head; w; w = w->seen_next)
        s_send_simple(b, w->rid, w->rid_len, PROTO_HEARTBEAT);
    broker_timers_arm(&b->timers, t, now_ms + b->heartbeat_ms);
}

void broker_worker_timers_start(broker_t *b)
{
    broker_timer_init(&b->heartbeat_timer, s_heartbeat_cb, b);
    broker_timer_init(&b->liveness_timer, s_liveness_cb, b);
    broker_timers_arm(&b->timers, &b->heartbeat_timer, b->now_ms + b->heartbeat_ms);
}

/* Credits from w; a paused worker that grants again is active again. */
static void s_grant(broker_t *b, broker_worker_t *w, uint32_t credits)
{
    if (credits > 0 && strcmp(w->state, "active") != 0) {
        LOG_INFO("worker %s resumed after being %s", w->name, w->state);
        snprintf(w->state, sizeof w->state, "active");
    }
    broker_registry_add_credits(&b->registry, w, credits);
}

broker_worker_t *broker_worker_on_hello(broker_t *b, const uint8_t *rid, size_t rid_len,
                                        const proto_hello_t *h)
{
    broker_worker_t *old = broker_registry_get(&b->registry, rid, rid_len);
    if (old) {
        /* It started over without us noticing: what it held is lost on its side. */
        char name[PROTO_MAX_NAME_BYTES + 1];
        snprintf(name, sizeof name, "%s", old->name);
        uint32_t n = broker_dispatch_lose_worker(b, old);
        LOG_INFO("worker %s left: registered again; re-queued %u jobs", name, n);
    }
    broker_worker_t *w = broker_registry_add(&b->registry, rid, rid_len, h->name, h->host,
                                             h->arch, h->slots, b->now_ms);
    w->speed = h->speed;
    snprintf(w->state, sizeof w->state, "active");
    char list[1024] = "";
    size_t used = 0;
    for (uint32_t i = 0; i < h->n_plugins; i++) {
        broker_plugin_t *known = NULL;
        broker_plugin_t *p = broker_catalog_report(&b->catalog, &h->plugins[i], &known);
        if (p)
            broker_worker_carry(w, p);
        /* Remembered, so a restarted broker accepts work for it at once. */
        broker_store_note_plugin(b->store, known);
        if (!p)
            broker_worker_block(w, known); /* STATUS says why its jobs wait */
        if (used < sizeof list) {
            int k = snprintf(list + used, sizeof list - used, "%s%s %s%s", i ? ", " : "",
                             h->plugins[i].name, h->plugins[i].version,
                             p ? "" : " (another build than the pinned one: no jobs)");
            if (k > 0)
                used += (size_t)k;
        }
    }
    LOG_INFO("worker %s joined from %s (%s), %u slots, speed %.1f, plugins: %s", w->name,
             w->host, w->arch, w->slots, w->speed, h->n_plugins ? list : "(none)");
    if (!broker_timer_armed(&b->liveness_timer))
        s_arm_liveness(b);
    return w;
}

void broker_worker_on_message(broker_t *b, const uint8_t *rid, size_t rid_len, const uint8_t *body,
                              size_t len)
{
    proto_msg_t *msg = NULL;
    proto_err_t err = {0};
    char hex[BROKER_RID_HEX];
    if (proto_msg_decode(body, len, &b->limits, &msg, &err) != PROTO_OK) {
        b->dropped_msgs++;
        LOG_WARN("dropped a bad message from worker %s: %s", broker_rid_hex(rid, rid_len, hex),
                 err.text[0] ? err.text : "undecodable");
        return;
    }
    broker_worker_t *w = broker_registry_get(&b->registry, rid, rid_len);
    switch (msg->type) {
    case PROTO_HELLO:
        w = broker_worker_on_hello(b, rid, rid_len, &msg->u.hello);
        break;
    case PROTO_CREDIT:
        if (w)
            s_grant(b, w, msg->u.credit.credits);
        break;
    case PROTO_DONE:
        for (uint32_t i = 0; i < msg->u.done.n_outcomes; i++)
            broker_dispatch_outcome(b, w, &msg->u.done.outcomes[i]);
        if (w)
            s_grant(b, w, msg->u.done.credits);
        break;
    case PROTO_HAND_BACK:
        if (w) {
            const proto_hand_back_t *hb = &msg->u.hand_back;
            uint32_t n = broker_dispatch_hand_back(b, w, hb->job_ids, hb->n_jobs);
            broker_registry_clear_credits(&b->registry, w);
            if (hb->draining) {
                snprintf(w->state, sizeof w->state, "draining");
                LOG_INFO("worker %s is draining (%s); re-queued the %u jobs it handed back, "
                         "its running evaluations finish",
                         w->name, hb->reason, n);
            } else {
                snprintf(w->state, sizeof w->state, "paused: %s", hb->reason);
                LOG_INFO("worker %s paused: %s; re-queued the %u jobs it handed back, none "
                         "sent until it asks again",
                         w->name, hb->reason, n);
            }
        }
        break;
    case PROTO_BYE:
        if (w) {
            char name[PROTO_MAX_NAME_BYTES + 1];
            snprintf(name, sizeof name, "%s", w->name);
            uint32_t n = broker_dispatch_drop_worker(b, w);
            LOG_INFO("worker %s left: said goodbye; re-queued %u jobs", name, n);
            w = NULL;
            s_arm_liveness(b);
        }
        goto done; /* a goodbye from a stranger needs no REHELLO */
    case PROTO_HEARTBEAT:
        break;
    default:
        b->dropped_msgs++;
        LOG_WARN("dropped a %s message from worker %s: not a message workers send",
                 proto_type_name((int)msg->type), broker_rid_hex(rid, rid_len, hex));
        goto done;
    }
    if (w)
        broker_registry_touch(&b->registry, w, b->now_ms);
    else
        s_send_simple(b, rid, rid_len, PROTO_REHELLO);
done:
    proto_msg_destroy(&msg);
}
