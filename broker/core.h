/* core.h: the broker's state, one struct shared by its modules: sockets,
 * resolved configuration, the catalog, registry, evaluation table, runs,
 * timers, the store seam, and per-turn scratch. Only the broker's own .c files
 * include it; the outside sees broker.h. Not here: behaviour (each module). */
#ifndef BROKER_CORE_H
#define BROKER_CORE_H

#include <stddef.h>
#include <stdint.h>

#include "broker.h"
#include "catalog.h"
#include "evals.h"
#include "intern.h"
#include "msg.h"
#include "registry.h"
#include "runs.h"
#include "speculate.h"
#include "stats.h"
#include "store.h"
#include "timers.h"

struct sqlite3_stmt;

#define BROKER_MSGS_PER_TURN 512     /* per socket per loop turn */
#define BROKER_TURN_BUDGET_MS 50     /* a socket's messages per turn stop after this (loop.c) */
#define BROKER_COMMIT_HOLD_MS 1      /* longest a new batch's commit waits for results (loop.c) */
#define BROKER_JOBS_PER_MSG 4096     /* jobs in one JOBS message */
#define BROKER_RESULTS_PER_MSG 4096  /* results in one RESULTS message */
#define BROKER_MSG_SOFT_BYTES (16u * 1024u * 1024u) /* stop filling a message past this */
#define BROKER_HWM 100000
/* Messages queued from one client connection before ZeroMQ stops reading
 * it (TCP then holds the sender back). ZeroMQ counts messages, not bytes:
 * with BROKER_HWM, a client sending large SUBMITs faster than the loop
 * handled them (a long commit) had the broker buffer them all, 1 GiB and
 * more; 64 bounds that to 64 messages per connection, while a turn drains
 * up to BROKER_MSGS_PER_TURN, so small messages never wait on it. */
#define BROKER_CLIENT_RCVHWM 64

static_assert(BROKER_MSG_SOFT_BYTES + PROTO_MAX_GENOME_BYTES + PROTO_MAX_PARAMS_BYTES <
                  PROTO_MAX_MESSAGE_BYTES,
              "a filled message plus one more job must stay under the message cap");

/* An ACCEPTED reply held until the turn's store commit. */
typedef struct {
    uint8_t rid[BROKER_RID_MAX];
    uint8_t rid_len;
    broker_run_t *run;
    uint64_t batch_tag;
    uint32_t n_accepted;
    uint8_t told_store; /* its turn's commit failed and the client was told why */
} broker_accept_t;

typedef struct broker {
    /* configuration with defaults applied */
    int liveness_ms;
    int heartbeat_ms;
    unsigned attempts;
    /* sockets (NULL in unit tests that drive the modules directly) */
    void *ctx;
    void *clients;
    void *workers;
    /* state */
    broker_catalog_t catalog;
    broker_registry_t registry;
    broker_evals_t evals;
    broker_runs_t runs;
    broker_intern_t intern;
    broker_timers_t timers;
    broker_store_t *store;
    broker_timer_t heartbeat_timer;
    broker_timer_t liveness_timer;
    broker_speculate_t spec; /* straggler copies (speculate.h) */
    uint64_t next_job_id;
    int64_t now_ms;
    int stopping;
    /* per-turn scratch, reused */
    broker_accept_t *accepts;
    size_t n_accepts, cap_accepts;
    proto_job_t *jobs;
    proto_result_t *results;
    /* counters */
    uint64_t jobs_sent, results_sent, dropped_msgs;
    broker_stats_t stats;         /* for the metrics page only (stats.h) */
    struct broker_http *http;     /* the metrics and status listener; NULL = off (http.h) */
    /* security and limits (zap.h, access.h, quota.h); zap NULL in plaintext mode */
    struct broker_zap *zap;
    struct common_sharelist *shares; /* runs shared with other keys; NULL = none */
    char *shares_path;
    proto_limits_t limits;
    uint64_t max_queued_per_run, max_queued_per_client;
    uint64_t max_queued_bytes, max_queued_bytes_per_key, max_queued_bytes_per_run;
    uint64_t max_runs, max_runs_per_key;
    uint64_t queued_bytes;         /* charged over all runs (quota.h) */
    struct broker_table *key_use;  /* owner text -> broker_keyuse_t */
    int64_t next_sweep_ms;         /* idle runs leave RAM (quota.h) */
    uint64_t runs_dropped, runs_reloaded;
    /* prepared statements of cache.c and backlog.c on the store's connection */
    struct sqlite3_stmt *cache_lookup, *backlog_page;
    /* 1 while every finished evaluation the store holds is also in RAM: the
     * store held none at start and nothing has been evicted since
     * (evals.evictions 0). A key missing from RAM is then new, and the
     * cache does not ask the store (cache.c). */
    int ram_holds_all_results;
    int backlog_more; /* the backlog could page more at once: do not sleep */
} broker_t;

/* Sets up every module (no sockets). attempts etc. already resolved. */
void broker_core_init(broker_t *b, int liveness_ms, int heartbeat_ms, unsigned attempts,
                      const char *store_dir);
/* The same from a configuration: also the memory caps (cache and delivery),
 * which must be known before the store is loaded. */
void broker_core_init_config(broker_t *b, const broker_config_t *config);
/* Frees every module's state (not the sockets). */
void broker_core_fini(broker_t *b);

#endif
