/* backlog.c: paging results owed to clients back from the store (see
 * backlog.h). Owns one prepared statement on the store's connection; it
 * reads a run's requests from its acknowledgement mark on (runs.acked_below,
 * store_sql.c), so a sweep never reads the acknowledged past however long the
 * run. Owns no results: they go to runs.c as copies. */
#include "backlog.h"

#include <inttypes.h>
#include <sqlite3.h>
#include <string.h>

#include "cache.h"
#include "common/log.h"

/* A no-cache request is answered by its run's latest re-evaluation of the
 * key (the results history), any other by the cached result. A request
 * whose result is not there yet (still queued) reads as status NULL and is
 * skipped: its evaluation answers it when done. */
static const char s_page_sql[] =
    "SELECT r.tag, r.cached, r.fresh, r.key, e.seed,"
    " CASE WHEN r.fresh THEN x.status ELSE e.status END,"
    " CASE WHEN r.fresh THEN x.fitness ELSE e.fitness END,"
    " CASE WHEN r.fresh THEN x.error ELSE e.error END, r.replicate, e.genome,"
    " CASE WHEN r.fresh THEN x.worker ELSE e.worker END,"
    " CASE WHEN r.fresh THEN x.host ELSE e.host END,"
    " CASE WHEN r.fresh THEN x.cpu_seconds ELSE e.cpu_seconds END,"
    " CASE WHEN r.fresh THEN x.peak_rss_kb ELSE e.peak_rss_kb END,"
    " CASE WHEN r.fresh THEN x.finished_at ELSE e.finished_at END"
    " FROM requests r JOIN evaluations e ON e.key = r.key"
    " LEFT JOIN results x ON r.fresh = 1 AND x.rowid = (SELECT max(rowid) FROM results y"
    "  WHERE y.run_id = r.run_id AND y.key = r.key AND y.fresh = 1)"
    " WHERE r.run_id = ?1 AND r.acked = 0"
    " AND r.tag >= max(?2, coalesce((SELECT acked_below FROM runs WHERE run_id = ?1), 0))"
    " AND r.tag <= ?3"
    " ORDER BY r.tag LIMIT ?4";

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

int broker_backlog_load(broker_t *b)
{
    sqlite3 *db = broker_store_db(b->store);
    if (sqlite3_prepare_v3(db, s_page_sql, -1, SQLITE_PREPARE_PERSISTENT, &b->backlog_page,
                           NULL) != SQLITE_OK) {
        LOG_ERROR("cannot load the store (backlog query): %s", sqlite3_errmsg(db));
        return -1;
    }
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(db,
                           "SELECT DISTINCT u.run_id FROM runs u CROSS JOIN requests r"
                           " ON r.run_id = u.run_id AND r.tag >= u.acked_below"
                           " JOIN evaluations e ON e.key = r.key"
                           " WHERE r.acked = 0 AND (e.status IS NOT NULL OR r.fresh = 1)",
                           -1, &st, NULL) != SQLITE_OK) {
        LOG_ERROR("cannot load the store (runs owed results): %s", sqlite3_errmsg(db));
        return -1;
    }
    uint32_t n = 0;
    int rc;
    while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
        const char *id = (const char *)sqlite3_column_text(st, 0);
        broker_run_t *run = id ? broker_runs_get(&b->runs, id) : NULL;
        if (run) {
            broker_runs_owe_all(&b->runs, run);
            n++;
        }
    }
    if (rc != SQLITE_DONE) {
        /* Not the last row: the runs after it would never be paged back. */
        int prim = rc & 0xff;
        if (prim == SQLITE_CORRUPT || prim == SQLITE_NOTADB)
            broker_store_report_damage(broker_store_path(b->store),
                                       "reading the runs owed results", sqlite3_errmsg(db));
        else
            LOG_ERROR("cannot load the store %s (runs owed results): %s",
                      broker_store_path(b->store), sqlite3_errmsg(db));
        sqlite3_finalize(st);
        return -1;
    }
    sqlite3_finalize(st);
    if (n)
        LOG_INFO("store: %u runs owe unacknowledged results; they are read back as their "
                 "clients return", n);
    return 0;
}

/* Reads up to limit owed rows of run into its outbox; returns rows read. */
static int s_page(broker_t *b, broker_run_t *run, int limit)
{
    broker_store_flush(b->store); /* requests noted this turn, read below */
    sqlite3_stmt *st = b->backlog_page;
    sqlite3_bind_text(st, 1, run->id, -1, SQLITE_STATIC);
    sqlite3_bind_int64(st, 2, run->spill_cur);
    sqlite3_bind_int64(st, 3, run->spill_to);
    sqlite3_bind_int(st, 4, limit);
    int rows = 0, rc;
    int64_t last = run->spill_cur;
    double fit[PROTO_MAX_OBJECTIVES];
    while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
        rows++;
        last = sqlite3_column_int64(st, 0);
        uint64_t tag = (uint64_t)last;
        if (sqlite3_column_type(st, 5) == SQLITE_NULL || sqlite3_column_bytes(st, 3) != PROTO_KEY_BYTES ||
            broker_table_get(run->unacked, &tag, sizeof tag))
            continue; /* not answered yet, or already held in RAM */
        broker_delivery_t d = {.tag = tag,
                               .seed = broker_run_request_seed(
                                   run, sqlite3_column_blob(st, 9),
                                   (uint32_t)sqlite3_column_bytes(st, 9),
                                   (uint32_t)sqlite3_column_int64(st, 8)),
                               .status = (uint8_t)sqlite3_column_int(st, 5),
                               .cached = (uint8_t)(sqlite3_column_int(st, 1) != 0),
                               .fresh = (uint8_t)(sqlite3_column_int(st, 2) != 0),
                               .error = (char *)sqlite3_column_text(st, 7)};
        memcpy(d.key, sqlite3_column_blob(st, 3), PROTO_KEY_BYTES);
        broker_cache_row_provenance(b, st, 10, &d.prov);
        d.n_fitness = s_fitness(st, 6, fit);
        d.fitness = fit;
        (void)broker_runs_redeliver_copy(&b->runs, run, &d);
    }
    if (rc != SQLITE_DONE && rc != SQLITE_ROW) {
        LOG_ERROR("store: reading the results owed to run %s failed: %s", run->id,
                  sqlite3_errmsg(broker_store_db(b->store)));
        rows = limit; /* not the end: try again next turn */
    } else {
        broker_runs_spill_advance(&b->runs, run, last, rows < limit);
    }
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return rows;
}

int broker_backlog_turn(broker_t *b)
{
    if (!b->backlog_page)
        return 0;
    int budget = BROKER_BACKLOG_TURN, more = 0;
    broker_run_t **link = &b->runs.spill_head;
    while (*link) {
        broker_run_t *run = *link;
        if (!run->in_spill) {
            *link = run->spill_next; /* done since the last pass */
            run->spill_next = NULL;
            run->spill_linked = 0;
            continue;
        }
        uint64_t room = broker_runs_room(&b->runs, run);
        if (run->client_len && room > 0) {
            if (budget == 0) {
                more = 1; /* this turn's reads are spent: the next turn goes on */
            } else {
                int limit = room < BROKER_BACKLOG_PAGE ? (int)room : BROKER_BACKLOG_PAGE;
                if (limit > budget)
                    limit = budget;
                budget -= s_page(b, run, limit);
                /* Rows remain and there is room (some rows were not owed): go on now. */
                if (run->in_spill && broker_runs_room(&b->runs, run) > 0)
                    more = 1;
            }
        }
        link = &run->spill_next;
    }
    return more;
}

void broker_backlog_fini(broker_t *b)
{
    sqlite3_finalize(b->backlog_page);
    b->backlog_page = NULL;
}
