/* core.c: setting up and tearing down the broker's state (core.h). Owns the
 * per-turn scratch arrays; each module owns the rest. */
#include "core.h"

#include <sodium.h>
#include <stdlib.h>
#include <string.h>

#include "backlog.h"
#include "cache.h"
#include "common/alloc.h"
#include "quota.h"

void broker_core_init(broker_t *b, int liveness_ms, int heartbeat_ms, unsigned attempts,
                      const char *store_dir)
{
    broker_config_t config = {.liveness_ms = liveness_ms,
                              .heartbeat_ms = heartbeat_ms,
                              .attempts = attempts,
                              .store_dir = store_dir};
    broker_core_init_config(b, &config);
}

void broker_core_init_config(broker_t *b, const broker_config_t *config)
{
    memset(b, 0, sizeof *b);
    b->liveness_ms = config->liveness_ms > 0 ? config->liveness_ms : 5000;
    b->heartbeat_ms = config->heartbeat_ms > 0 ? config->heartbeat_ms : 1000;
    b->attempts = config->attempts > 0 ? config->attempts : 3;
    broker_speculate_init(&b->spec, !config->no_speculation, config->speculate_after);
    b->limits = proto_limits_default();
    b->max_queued_per_run = BROKER_DEFAULT_QUEUED_PER_RUN;
    b->max_queued_per_client = BROKER_DEFAULT_QUEUED_PER_CLIENT;
    b->max_queued_bytes = BROKER_DEFAULT_QUEUED_BYTES;
    b->max_queued_bytes_per_key = BROKER_DEFAULT_QUEUED_BYTES_PER_KEY;
    b->max_queued_bytes_per_run = BROKER_DEFAULT_QUEUED_BYTES_PER_RUN;
    b->max_runs = BROKER_DEFAULT_RUNS;
    b->max_runs_per_key = BROKER_DEFAULT_RUNS_PER_KEY;
    b->key_use = broker_table_new(broker_keyuse_key);
    broker_catalog_init(&b->catalog);
    broker_registry_init(&b->registry);
    broker_evals_init(&b->evals);
    broker_evals_set_caps(&b->evals, config->cache_entries, config->cache_bytes);
    broker_runs_init(&b->runs);
    broker_runs_set_caps(&b->runs, config->max_unacked_per_run, config->max_unacked);
    broker_intern_init(&b->intern);
    broker_timers_init(&b->timers);
    b->store = broker_store_open(config->store_dir, config->scratch_store,
                                 config->lock_wait_ms > 0 ? config->lock_wait_ms
                                                          : BROKER_DEFAULT_LOCK_WAIT_MS);
    /* NULL store: broker_main_run refuses to start (the open logged why). */
    if (b->store && broker_store_load(b) != 0)
        broker_store_close(&b->store);
    /* Job ids start at a random multiple of 2^32, so a worker's late DONE
     * for a job of the previous broker process never matches a new job. */
    if (sodium_init() < 0)
        abort();
    b->next_job_id = ((uint64_t)(randombytes_random() & 0x3fffffffu) + 1u) << 32;
    b->jobs = common_xcalloc(BROKER_JOBS_PER_MSG, sizeof *b->jobs);
    b->results = common_xcalloc(BROKER_RESULTS_PER_MSG, sizeof *b->results);
}

void broker_core_fini(broker_t *b)
{
    /* Registry first: freeing workers decrements catalog carrier counts. */
    broker_registry_fini(&b->registry);
    broker_runs_fini(&b->runs);
    broker_quota_fini(b);
    broker_evals_fini(&b->evals);
    broker_catalog_fini(&b->catalog);
    broker_intern_fini(&b->intern);
    broker_timers_fini(&b->timers);
    broker_cache_fini(b); /* statements on the store's connection go first */
    broker_backlog_fini(b);
    broker_store_close(&b->store);
    free(b->jobs);
    free(b->results);
    free(b->accepts);
    b->jobs = NULL;
    b->results = NULL;
    b->accepts = NULL;
}
