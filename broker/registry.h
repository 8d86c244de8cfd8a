/* registry.h: the connected workers, by ROUTER routing id.
 *
 * Worker registration lifecycle:
 *
 *   state      | entered by                              | what holds
 *   -----------+-----------------------------------------+-----------------------------------
 *   unknown    | (start), broker_dispatch_drop_worker    | not in the registry; any message
 *              |                                         | but HELLO is answered with REHELLO
 *   registered | broker_worker_on_hello -> registry_add  | in by_rid and the last-seen list;
 *              |                                         | credits 0 until CREDIT/DONE
 *   ready      | broker_worker_on_message (CREDIT, DONE  | registered and credits > 0: in the
 *              | add credits)                            | ready list; broker_dispatch_turn
 *              |                                         | spends credits, back to registered
 *              |                                         | at 0
 *   (gone)     | broker_dispatch_drop_worker on BYE,     | held jobs re-queued at the front of
 *              | silence past liveness, or a new HELLO   | their runs; job ids become orphans;
 *              | on the same routing id                  | freed
 *
 * Each message refreshes last_seen and moves the worker to the tail of the
 * last-seen list, so the head is always the quietest worker and one liveness
 * timer suffices (O(1) per message). Not here: what jobs mean (dispatch.c). */
#ifndef BROKER_REGISTRY_H
#define BROKER_REGISTRY_H

#include <stddef.h>
#include <stdint.h>

#include "catalog.h"
#include "table.h"

#define BROKER_RID_MAX 255 /* ZeroMQ routing ids are 1..255 bytes */

struct broker_eval;

typedef struct broker_worker {
    uint8_t rid[BROKER_RID_MAX];
    uint8_t rid_len;
    uint64_t serial; /* unique per registration, never 0 */
    char *name, *host, *arch;
    uint32_t slots;
    broker_plugin_t **plugins; /* carried, borrowed from the catalog */
    broker_timing_t *timing;   /* wall seconds of its evaluations, per plugins[i] */
    uint32_t n_plugins;
    broker_plugin_t **blocked; /* offered with another build than the pinned: no jobs */
    uint32_t n_blocked;
    uint8_t *carries; /* bitmap over catalog plugin ids */
    uint32_t carries_bits;
    uint32_t credits;
    uint32_t held; /* jobs dispatched and not finished */
    uint32_t copies; /* straggler copies running here (speculate.h), not in held */
    /* Outcomes this registration reported and the CPU seconds they say they
     * took (the metrics page); retried and ignored ones count too. */
    uint64_t outcomes;
    double cpu_seconds;
    struct broker_eval *jobs_head, *jobs_tail; /* held, in dispatch order */
    int64_t last_seen_ms;
    struct broker_worker *seen_prev, *seen_next;   /* last-seen order */
    struct broker_worker *ready_prev, *ready_next; /* credits > 0 */
    int in_ready;
    char user_id[41]; /* CURVE: the worker's public key (Z85) from ZAP; "" in plaintext */
    double speed;     /* its calibration score from HELLO (msg.h); 0 = not measured */
    /* "active", or "paused: " and the reason of its last HAND_BACK until its
     * next grant of credits (STATUS shows it). */
    char state[PROTO_MAX_NAME_BYTES + 16];
} broker_worker_t;

typedef struct {
    broker_table_t *by_rid;
    broker_worker_t *seen_head, *seen_tail;
    broker_worker_t *ready_head, *ready_tail;
    uint32_t n;
    uint64_t next_serial;
} broker_registry_t;

void broker_registry_init(broker_registry_t *self);
/* Frees every worker still registered (their jobs are not touched). */
void broker_registry_fini(broker_registry_t *self);

/* Borrowed, valid until removed; NULL if unknown. */
broker_worker_t *broker_registry_get(const broker_registry_t *self, const uint8_t *rid,
                                     size_t rid_len);
/* New registration (rid must be unknown); strings copied. Borrowed, valid until
 * broker_registry_remove. */
broker_worker_t *broker_registry_add(broker_registry_t *self, const uint8_t *rid, size_t rid_len,
                                     const char *name, const char *host, const char *arch,
                                     uint32_t slots, int64_t now_ms);
/* Adds a plugin the worker carries (counts it as a carrier in the catalog). */
void broker_worker_carry(broker_worker_t *w, broker_plugin_t *plugin);
/* Records that w offers plugin's name and version with a build the catalog
 * does not give jobs to (counted in plugin->blocked_offers while w is here). */
void broker_worker_block(broker_worker_t *w, broker_plugin_t *plugin);
int broker_worker_carries(const broker_worker_t *w, const broker_plugin_t *plugin);
/* w's timing for a plugin it carries; NULL when it does not carry it. */
broker_timing_t *broker_worker_timing(broker_worker_t *w, const broker_plugin_t *plugin);
/* Unlinks and frees w; the caller has emptied its job list first. */
void broker_registry_remove(broker_registry_t *self, broker_worker_t *w);

/* A message arrived: last_seen = now, tail of the last-seen list. */
void broker_registry_touch(broker_registry_t *self, broker_worker_t *w, int64_t now_ms);
/* Adds credits (saturating) and keeps the ready list in step. */
void broker_registry_add_credits(broker_registry_t *self, broker_worker_t *w, uint32_t credits);
/* Spends one credit. */
void broker_registry_spend(broker_registry_t *self, broker_worker_t *w);
/* Forgets w's credits (it handed back, paused: msg.h HAND_BACK). */
void broker_registry_clear_credits(broker_registry_t *self, broker_worker_t *w);

/* Held job list (dispatch order). */
void broker_worker_hold(broker_worker_t *w, struct broker_eval *e);
void broker_worker_release(broker_worker_t *w, struct broker_eval *e);

int broker_registry_check(const broker_registry_t *self);

#endif
