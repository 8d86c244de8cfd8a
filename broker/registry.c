/* registry.c: the worker registry (see registry.h for the lifecycle). Owns
 * worker records and their strings; borrows plugins and held evaluations. */
#include "registry.h"

#include <assert.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "evals.h"

static const void *s_rid_key(const void *value, size_t *len)
{
    const broker_worker_t *w = value;
    *len = w->rid_len;
    return w->rid;
}

void broker_registry_init(broker_registry_t *self)
{
    memset(self, 0, sizeof *self);
    self->by_rid = broker_table_new(s_rid_key);
    self->next_serial = 1;
}

static void s_free_worker(broker_worker_t *w)
{
    for (uint32_t i = 0; i < w->n_plugins; i++)
        w->plugins[i]->carriers--;
    for (uint32_t i = 0; i < w->n_blocked; i++)
        w->blocked[i]->blocked_offers--;
    free(w->plugins);
    free(w->timing);
    free(w->blocked);
    free(w->carries);
    free(w->name);
    free(w->host);
    free(w->arch);
    free(w);
}

void broker_registry_fini(broker_registry_t *self)
{
    broker_worker_t *w = self->seen_head;
    while (w) {
        broker_worker_t *next = w->seen_next;
        s_free_worker(w);
        w = next;
    }
    broker_table_destroy(&self->by_rid);
    memset(self, 0, sizeof *self);
}

broker_worker_t *broker_registry_get(const broker_registry_t *self, const uint8_t *rid,
                                     size_t rid_len)
{
    return broker_table_get(self->by_rid, rid, rid_len);
}

static void s_seen_unlink(broker_registry_t *self, broker_worker_t *w)
{
    if (w->seen_prev)
        w->seen_prev->seen_next = w->seen_next;
    else
        self->seen_head = w->seen_next;
    if (w->seen_next)
        w->seen_next->seen_prev = w->seen_prev;
    else
        self->seen_tail = w->seen_prev;
    w->seen_prev = w->seen_next = NULL;
}

static void s_seen_append(broker_registry_t *self, broker_worker_t *w)
{
    w->seen_prev = self->seen_tail;
    w->seen_next = NULL;
    if (self->seen_tail)
        self->seen_tail->seen_next = w;
    else
        self->seen_head = w;
    self->seen_tail = w;
}

static void s_ready_set(broker_registry_t *self, broker_worker_t *w, int ready)
{
    if (ready == w->in_ready)
        return;
    if (ready) {
        w->ready_prev = self->ready_tail;
        w->ready_next = NULL;
        if (self->ready_tail)
            self->ready_tail->ready_next = w;
        else
            self->ready_head = w;
        self->ready_tail = w;
    } else {
        if (w->ready_prev)
            w->ready_prev->ready_next = w->ready_next;
        else
            self->ready_head = w->ready_next;
        if (w->ready_next)
            w->ready_next->ready_prev = w->ready_prev;
        else
            self->ready_tail = w->ready_prev;
        w->ready_prev = w->ready_next = NULL;
    }
    w->in_ready = ready;
}

broker_worker_t *broker_registry_add(broker_registry_t *self, const uint8_t *rid, size_t rid_len,
                                     const char *name, const char *host, const char *arch,
                                     uint32_t slots, int64_t now_ms)
{
    assert(rid_len >= 1 && rid_len <= BROKER_RID_MAX);
    assert(!broker_registry_get(self, rid, rid_len));
    broker_worker_t *w = common_xcalloc(1, sizeof *w);
    memcpy(w->rid, rid, rid_len);
    w->rid_len = (uint8_t)rid_len;
    w->serial = self->next_serial++;
    w->name = common_xstrdup(name);
    w->host = common_xstrdup(host);
    w->arch = common_xstrdup(arch);
    w->slots = slots;
    w->last_seen_ms = now_ms;
    broker_table_put(self->by_rid, w->rid, w->rid_len, w);
    s_seen_append(self, w);
    self->n++;
    assert(broker_registry_check(self));
    return w;
}

void broker_worker_carry(broker_worker_t *w, broker_plugin_t *plugin)
{
    if (broker_worker_carries(w, plugin))
        return;
    if (plugin->id >= w->carries_bits) {
        uint32_t bits = (plugin->id / 64 + 1) * 64;
        w->carries = common_xrealloc(w->carries, bits / 8, 1);
        memset(w->carries + w->carries_bits / 8, 0, (bits - w->carries_bits) / 8);
        w->carries_bits = bits;
    }
    w->carries[plugin->id / 8] |= (uint8_t)(1u << (plugin->id % 8));
    w->plugins = common_xrealloc(w->plugins, (size_t)w->n_plugins + 1, sizeof *w->plugins);
    w->timing = common_xrealloc(w->timing, (size_t)w->n_plugins + 1, sizeof *w->timing);
    memset(&w->timing[w->n_plugins], 0, sizeof *w->timing);
    w->plugins[w->n_plugins++] = plugin;
    plugin->carriers++;
}

void broker_worker_block(broker_worker_t *w, broker_plugin_t *plugin)
{
    for (uint32_t i = 0; i < w->n_blocked; i++)
        if (w->blocked[i] == plugin)
            return;
    w->blocked = common_xrealloc(w->blocked, (size_t)w->n_blocked + 1, sizeof *w->blocked);
    w->blocked[w->n_blocked++] = plugin;
    plugin->blocked_offers++;
}

int broker_worker_carries(const broker_worker_t *w, const broker_plugin_t *plugin)
{
    return plugin->id < w->carries_bits && (w->carries[plugin->id / 8] >> (plugin->id % 8)) & 1u;
}

broker_timing_t *broker_worker_timing(broker_worker_t *w, const broker_plugin_t *plugin)
{
    for (uint32_t i = 0; i < w->n_plugins; i++)
        if (w->plugins[i] == plugin)
            return &w->timing[i];
    return NULL;
}

void broker_registry_remove(broker_registry_t *self, broker_worker_t *w)
{
    assert(w->held == 0 && w->jobs_head == NULL);
    void *was = broker_table_delete(self->by_rid, w->rid, w->rid_len);
    assert(was == w);
    (void)was;
    s_seen_unlink(self, w);
    s_ready_set(self, w, 0);
    self->n--;
    s_free_worker(w);
    assert(broker_registry_check(self));
}

void broker_registry_touch(broker_registry_t *self, broker_worker_t *w, int64_t now_ms)
{
    w->last_seen_ms = now_ms;
    if (self->seen_tail != w) {
        s_seen_unlink(self, w);
        s_seen_append(self, w);
    }
}

void broker_registry_add_credits(broker_registry_t *self, broker_worker_t *w, uint32_t credits)
{
    /* A worker's credits are bounded by what it could sensibly hold; a huge
     * grant is clamped rather than trusted. */
    uint64_t c = (uint64_t)w->credits + credits;
    /* A worker asks for at most 64 jobs per slot (its prefetch cap); a
     * worker claiming more can hold no more than that, so a hostile one
     * cannot sit on the whole queue. */
    uint64_t slots = w->slots ? (w->slots > 4096 ? 4096 : w->slots) : 1;
    uint64_t cap = slots * 64u < 1024u ? 1024u : slots * 64u;
    w->credits = c > cap ? (uint32_t)cap : (uint32_t)c;
    s_ready_set(self, w, w->credits > 0);
}

void broker_registry_spend(broker_registry_t *self, broker_worker_t *w)
{
    assert(w->credits > 0);
    w->credits--;
    s_ready_set(self, w, w->credits > 0);
}

void broker_registry_clear_credits(broker_registry_t *self, broker_worker_t *w)
{
    w->credits = 0;
    s_ready_set(self, w, 0);
}

void broker_worker_hold(broker_worker_t *w, struct broker_eval *e)
{
    e->prev = w->jobs_tail;
    e->next = NULL;
    if (w->jobs_tail)
        w->jobs_tail->next = e;
    else
        w->jobs_head = e;
    w->jobs_tail = e;
    w->held++;
}

void broker_worker_release(broker_worker_t *w, struct broker_eval *e)
{
    if (e->prev)
        e->prev->next = e->next;
    else
        w->jobs_head = e->next;
    if (e->next)
        e->next->prev = e->prev;
    else
        w->jobs_tail = e->prev;
    e->prev = e->next = NULL;
    assert(w->held > 0);
    w->held--;
}

int broker_registry_check(const broker_registry_t *self)
{
    uint32_t n = 0;
    int64_t last = INT64_MIN;
    for (const broker_worker_t *w = self->seen_head; w; w = w->seen_next) {
        if (w->last_seen_ms < last)
            return 0;
        last = w->last_seen_ms;
        if (broker_registry_get(self, w->rid, w->rid_len) != w)
            return 0;
        n++;
    }
    if (n != self->n || broker_table_size(self->by_rid) != n)
        return 0;
    for (const broker_worker_t *w = self->ready_head; w; w = w->ready_next)
        if (!w->in_ready || w->credits == 0)
            return 0;
    return 1;
}
