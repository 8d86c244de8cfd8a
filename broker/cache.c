/* cache.c: reading an evicted or not yet loaded result back from the store
 * into the evaluation table (see cache.h). Owns one prepared statement on the
 * store's connection; the evaluations it creates belong to evals.c. */
#include "cache.h"

#include <inttypes.h>
#include <math.h>
#include <sqlite3.h>
#include <string.h>

#include "common/log.h"

static const char s_lookup_sql[] =
    "SELECT plugin, params, NULL, seed, timeout_ms, max_attempts, status, fitness, error,"
    " attempts, " BROKER_CACHE_PROVENANCE_COLUMNS ", version"
    " FROM evaluations WHERE key = ?1 AND status IS NOT NULL";

/* Fitness doubles from a little-endian blob; returns how many (capped). */
static uint32_t s_fitness(sqlite3_stmt *st, int col, double *fit)
{
    const uint8_t *le = sqlite3_column_blob(st, col);
    uint32_t nf = (uint32_t)(sqlite3_column_bytes(st, col) / 8);
    if (nf > PROTO_MAX_OBJECTIVES)
        nf = PROTO_MAX_OBJECTIVES;
    for (uint32_t i = 0; i < nf; i++) {
        uint64_t bits = 0;
        for (int k = 0; k < 8; k++)
            bits |= (uint64_t)le[i * 8 + (uint32_t)k] << (8 * k);
        memcpy(&fit[i], &bits, 8);
    }
    return nf;
}

void broker_cache_row_provenance(broker_t *b, sqlite3_stmt *st, int col,
                                 broker_provenance_t *out)
{
    const char *worker = (const char *)sqlite3_column_text(st, col);
    const char *host = (const char *)sqlite3_column_text(st, col + 1);
    double cpu = sqlite3_column_double(st, col + 2);
    sqlite3_int64 rss = sqlite3_column_int64(st, col + 3);
    double at = sqlite3_column_double(st, col + 4);
    /* The store is ours, but a hand-edited file must not put a value on
     * the wire that the client's decoder refuses. */
    *out = (broker_provenance_t){.worker = broker_intern(&b->intern, worker ? worker : ""),
                                 .host = broker_intern(&b->intern, host ? host : ""),
                                 .cpu_seconds = isfinite(cpu) && cpu > 0 ? cpu : 0,
                                 .peak_rss_kb = rss > 0 ? (uint64_t)rss : 0,
                                 .finished_at = isfinite(at) && at > 0 ? at : 0};
}

broker_eval_t *broker_cache_lookup(broker_t *b, const uint8_t key[PROTO_KEY_BYTES])
{
    broker_eval_t *e = broker_evals_get(&b->evals, key);
    if (e) {
        broker_evals_touch(&b->evals, e);
        return e;
    }
    /* Nothing finished leaves RAM but by eviction: until the first one, a
     * store that started without results holds none RAM lacks. */
    if (!b->store || (b->ram_holds_all_results && b->evals.evictions == 0))
        return NULL;
    sqlite3 *db = broker_store_db(b->store);
    if (!b->cache_lookup &&
        sqlite3_prepare_v3(db, s_lookup_sql, -1, SQLITE_PREPARE_PERSISTENT, &b->cache_lookup,
                           NULL) != SQLITE_OK) {
        LOG_ERROR("store: cannot prepare the cache lookup: %s", sqlite3_errmsg(db));
        return NULL;
    }
    sqlite3_stmt *st = b->cache_lookup;
    sqlite3_bind_blob(st, 1, key, PROTO_KEY_BYTES, SQLITE_STATIC);
    int rc = sqlite3_step(st);
    if (rc == SQLITE_ROW) {
        const char *name = (const char *)sqlite3_column_text(st, 0);
        const char *params = (const char *)sqlite3_column_text(st, 1);
        const char *version = (const char *)sqlite3_column_text(st, 15);
        /* The version the key was computed with (it is part of the key). */
        broker_plugin_t *plugin =
            name && version ? broker_catalog_get(&b->catalog, name, version) : NULL;
        if (plugin && params) {
            double fit[PROTO_MAX_OBJECTIVES];
            /* No genome: a finished evaluation keeps none (evals.h), so
             * column 2 is a NULL placeholder. */
            e = broker_evals_new(&b->evals, key, plugin, broker_intern(&b->intern, params),
                                 (uint64_t)sqlite3_column_int64(st, 3), NULL, 0);
            e->live->timeout_ms = (uint32_t)sqlite3_column_int64(st, 4);
            e->live->max_attempts = (uint16_t)sqlite3_column_int(st, 5);
            e->live->attempts = (uint16_t)sqlite3_column_int(st, 9);
            uint32_t nf = s_fitness(st, 7, fit);
            broker_provenance_t prov;
            broker_cache_row_provenance(b, st, 10, &prov);
            broker_eval_set_result(&b->evals, e, (uint32_t)sqlite3_column_int(st, 6), fit, nf,
                                   (const char *)sqlite3_column_text(st, 8), &prov);
            broker_evals_settle(&b->evals, e);
            b->evals.store_hits++;
        }
    } else if (rc != SQLITE_DONE) {
        LOG_ERROR("store: cache lookup failed: %s", sqlite3_errmsg(db));
    }
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return e;
}

void broker_cache_fini(broker_t *b)
{
    sqlite3_finalize(b->cache_lookup);
    b->cache_lookup = NULL;
}

void broker_cache_log(broker_t *b)
{
    const broker_evals_t *ev = &b->evals;
    LOG_INFO("memory: %" PRIu64 " cached results in RAM (cap %" PRIu64 ", peak %" PRIu64
             ", ~%" PRIu64 " KiB), %" PRIu64 " finished evaluations in RAM (peak %" PRIu64
             "), %zu evaluations indexed, %" PRIu64 " evicted, %" PRIu64
             " read back from the store; %" PRIu64 " results held for clients (peak %" PRIu64
             ", cap %" PRIu64 " per run), %" PRIu64 " left in the store at the cap",
             ev->n_cached, ev->cap_entries, ev->peak_cached, ev->cached_bytes / 1024,
             ev->n_done_ram, ev->peak_done_ram, broker_table_size(ev->by_key), ev->evictions,
             ev->store_hits, b->runs.n_held, b->runs.peak_held, b->runs.max_per_run,
             b->runs.n_spilled);
}
