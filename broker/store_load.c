/* store_load.c: rebuilding the broker's state from the store at start (see
 * store.h): the plugin catalog (so a SUBMIT that arrives before any worker is
 * back is not refused), the runs, and the pending evaluations, queued again in
 * the run of their first request with every request waiting on them.
 * Finished results are not loaded: the evaluation table is a bounded cache
 * over the store (cache.c reads a key back on a miss), and results answered
 * but not acknowledged are owed from the store, paged back when the client
 * returns (backlog.c). Owns nothing after it returns. */
#include <inttypes.h>
#include <jansson.h>
#include <sqlite3.h>
#include <stdio.h>
#include <string.h>

#include "backlog.h"
#include "cache.h"
#include "common/log.h"
#include "params.h"
#include "core.h"
#include "quota.h"

static const char *s_path;

/* Any error while reading the store at start stops the start: an error
 * that ended a loop early would otherwise read like its last row, and a
 * broker that half-loaded its pending work would leave accepted requests
 * unanswered for good. rc is SQLite's code (damage gets the recovery text). */
static int s_fail_rc(sqlite3 *db, const char *what, int rc)
{
    int prim = rc & 0xff;
    char text[160];
    snprintf(text, sizeof text, "reading %s", what);
    if (prim == SQLITE_CORRUPT || prim == SQLITE_NOTADB)
        broker_store_report_damage(s_path, text, sqlite3_errmsg(db));
    else
        LOG_ERROR("cannot load the store %s (%s): %s; the broker does not start on a store it "
                  "could not read whole",
                  s_path, text, sqlite3_errmsg(db));
    return -1;
}

static int s_fail(sqlite3 *db, const char *what)
{
    return s_fail_rc(db, what, sqlite3_errcode(db));
}

/* After a row loop: rc must be SQLITE_DONE. Finalizes st either way. */
static int s_end(sqlite3 *db, sqlite3_stmt *st, int rc, const char *what)
{
    int ret = rc == SQLITE_DONE ? 0 : s_fail_rc(db, what, rc);
    sqlite3_finalize(st);
    return ret;
}

static uint64_t s_u64(sqlite3_stmt *st, int col)
{
    return (uint64_t)sqlite3_column_int64(st, col);
}

/* plugins.seed_params: a JSON array of at most PROTO_MAX_SEED_PARAMS names,
 * or NULL (a store older than the list). Anything else is reported as not
 * recorded (count UINT32_MAX, catalog.c), so the next HELLO fills it, rather
 * than as "none", which would key requests with the seed for good. Returns
 * the parsed array (caller decrefs) or NULL. */
static json_t *s_seed_params(sqlite3_stmt *st, int col, const char *plugin,
                             proto_plugin_info_t *info, char **names)
{
    info->n_seed_params = UINT32_MAX;
    const char *text = (const char *)sqlite3_column_text(st, col);
    if (!text)
        return NULL;
    json_t *a = json_loads(text, 0, NULL);
    size_t n = json_array_size(a);
    int ok = json_is_array(a) && n <= PROTO_MAX_SEED_PARAMS;
    for (size_t i = 0; ok && i < n; i++) {
        names[i] = (char *)json_string_value(json_array_get(a, i));
        ok = names[i] != NULL;
    }
    if (!ok) {
        LOG_WARN("store: plugin %s has unreadable seed params %.64s; waiting for a worker's",
                 plugin, text);
        json_decref(a);
        return NULL;
    }
    info->n_seed_params = (uint32_t)n;
    info->seed_params = n ? names : NULL;
    return a;
}

static int s_load_plugins(broker_t *b, sqlite3 *db, uint32_t *n)
{
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(db,
                           "SELECT name, version, objectives, flags, digests, seed_params,"
                           " param_defaults FROM plugins ORDER BY first_seen, rowid",
                           -1, &st, NULL) != SQLITE_OK)
        return s_fail(db, "plugins");
    int rc;
    while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
        proto_plugin_info_t info;
        memset(&info, 0, sizeof info);
        char *names[PROTO_MAX_SEED_PARAMS];
        info.name = (char *)sqlite3_column_text(st, 0);
        info.version = (char *)sqlite3_column_text(st, 1);
        info.objectives = (uint32_t)sqlite3_column_int64(st, 2);
        info.flags = (uint32_t)sqlite3_column_int64(st, 3);
        const uint8_t *d = sqlite3_column_blob(st, 4);
        int nd = sqlite3_column_bytes(st, 4) / PROTO_DIGEST_BYTES;
        if (!info.name || !info.version)
            continue;
        json_t *seeds = s_seed_params(st, 5, info.name, &info, names);
        /* NULL (not recorded) stays NULL: the next HELLO fills it. A text
         * that is not canonical is not trusted either. */
        const char *dflt = (const char *)sqlite3_column_text(st, 6);
        char *canon_dflt = NULL;
        if (dflt && dflt[0] &&
            (proto_params_canonical(dflt, &canon_dflt, NULL, 0) != 0 || strcmp(canon_dflt, dflt))) {
            LOG_WARN("store: plugin %s has unreadable param defaults %.64s; waiting for a "
                     "worker's", info.name, dflt);
            dflt = NULL;
        }
        info.param_defaults = (char *)dflt;
        for (int i = 0; i < (nd > 0 ? nd : 1); i++) {
            if (nd > 0)
                memcpy(info.digest, d + (size_t)i * PROTO_DIGEST_BYTES, PROTO_DIGEST_BYTES);
            broker_catalog_report(&b->catalog, &info, NULL);
        }
        json_decref(seeds);
        free(canon_dflt);
        (*n)++;
    }
    return s_end(db, st, rc, "plugins");
}

static int s_load_runs(broker_t *b, sqlite3 *db, uint32_t *n)
{
    sqlite3_stmt *st = NULL;
    /* Only runs with a request not acknowledged (waiting, or answered and
     * owed): the others come back from the store on their next SUBMIT (quota.h). */
    if (sqlite3_prepare_v2(db,
                           "SELECT u.run_id, u.seed, u.seed_mode, u.owner FROM runs u"
                           " WHERE EXISTS (SELECT 1 FROM requests r WHERE r.run_id = u.run_id"
                           " AND r.tag >= u.acked_below AND r.acked = 0)",
                           -1, &st, NULL) != SQLITE_OK)
        return s_fail(db, "runs");
    int rc;
    while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
        const char *id = (const char *)sqlite3_column_text(st, 0);
        const char *owner = (const char *)sqlite3_column_text(st, 3);
        if (!id || broker_runs_get(&b->runs, id))
            continue;
        if (owner && (!*owner || strlen(owner) >= BROKER_KEY_TEXT)) {
            /* Not an identity the broker writes: nobody may claim it. */
            LOG_WARN("store: run %s has an unreadable owner %.48s; no key may use it until "
                     "it is shared (runs.share)", id, owner);
            owner = "?";
        }
        broker_run_t *run = broker_runs_new(&b->runs, id, s_u64(st, 1),
                                            (uint32_t)sqlite3_column_int(st, 2), owner);
        run->last_used_ms = b->now_ms;
        broker_quota_attach(b, run);
        (*n)++;
    }
    return s_end(db, st, rc, "runs");
}

/* A new evaluation from columns [key, plugin, params, genome, seed,
 * timeout_ms, max_attempts] starting at col and its plugin version at
 * version_col; NULL (logged) when that plugin version is unknown. It is
 * bound to the version its key was computed with, so it goes only to
 * workers carrying that version, whatever a constraint would pick today. */
static broker_eval_t *s_new_eval(broker_t *b, sqlite3_stmt *st, int col, int version_col)
{
    const uint8_t *key = sqlite3_column_blob(st, col);
    const char *plugin_name = (const char *)sqlite3_column_text(st, col + 1);
    const char *params = (const char *)sqlite3_column_text(st, col + 2);
    const char *version = (const char *)sqlite3_column_text(st, version_col);
    if (sqlite3_column_bytes(st, col) != PROTO_KEY_BYTES || !plugin_name || !params || !version)
        return NULL;
    broker_plugin_t *plugin = broker_catalog_get(&b->catalog, plugin_name, version);
    if (!plugin) {
        LOG_WARN("store: an evaluation for plugin %.128s version %.128s, which the store does "
                 "not list; skipped",
                 plugin_name, version);
        return NULL;
    }
    const uint8_t *genome = sqlite3_column_blob(st, col + 3);
    int genome_len = sqlite3_column_bytes(st, col + 3);
    broker_eval_t *e = broker_evals_new(&b->evals, key, plugin, broker_intern(&b->intern, params),
                                        s_u64(st, col + 4), genome, (uint32_t)genome_len);
    e->live->timeout_ms = (uint32_t)sqlite3_column_int64(st, col + 5);
    e->live->max_attempts = (uint16_t)sqlite3_column_int(st, col + 6);
    return e;
}

static int s_waits(broker_eval_t *e, broker_run_t *run, uint64_t tag)
{
    for (uint32_t i = 0; i < e->live->n_waiters; i++) {
        broker_waiter_t *w = broker_eval_waiter(e, i);
        if (w->run == run && w->tag == tag)
            return 1;
    }
    return 0;
}

static int s_load_requests(broker_t *b, sqlite3 *db, uint64_t *pending)
{
    sqlite3_stmt *st = NULL;
    /* Creation order, so a run's queue comes back oldest first. */
    if (sqlite3_prepare_v2(db,
                           "SELECT r.run_id, r.tag, r.cached, r.acked, e.key, e.plugin, e.params,"
                           " e.genome, e.seed, e.timeout_ms, e.max_attempts, r.replicate, e.version"
                           " FROM runs u CROSS JOIN requests r"
                           " ON r.run_id = u.run_id AND r.tag >= u.acked_below"
                           " JOIN evaluations e ON e.key = r.key"
                           " WHERE r.acked = 0 AND r.fresh = 0 AND e.status IS NULL"
                           " ORDER BY r.created",
                           -1, &st, NULL) != SQLITE_OK)
        return s_fail(db, "requests");
    int rc;
    while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
        const char *run_id = (const char *)sqlite3_column_text(st, 0);
        broker_run_t *run = run_id ? broker_runs_get(&b->runs, run_id) : NULL;
        const uint8_t *key = sqlite3_column_blob(st, 4);
        if (!run || sqlite3_column_bytes(st, 4) != PROTO_KEY_BYTES)
            continue;
        uint64_t tag = s_u64(st, 1);
        broker_eval_t *e = broker_evals_get(&b->evals, key);
        if (!e) {
            e = s_new_eval(b, st, 4, 12);
            if (!e)
                continue;
        }
        if (e->state == BROKER_EVAL_DONE || s_waits(e, run, tag))
            continue;
        uint32_t replicate = (uint32_t)sqlite3_column_int64(st, 11);
        broker_eval_add_waiter(e, run, tag,
                               broker_run_request_seed(run, e->live->genome, e->live->genome_len, replicate));
        broker_run_count_request(run);
        if (!e->live->home) {
            broker_runs_enqueue(&b->runs, run, e, 0);
            broker_quota_charge(b, run, e);
            (*pending)++;
        }
    }
    return s_end(db, st, rc, "requests");
}

/* No-cache requests not yet acknowledged and not answered (no results row of
 * their run with fresh = 1; answered ones are owed from the store, backlog.c)
 * wait on a re-evaluation queued again. The cached result of their key is
 * read back from the store. */
static int s_load_fresh(broker_t *b, sqlite3 *db, uint64_t *pending)
{
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(db,
                           "SELECT r.run_id, r.tag, r.key, x.status, x.fitness, x.error,"
                           " e.timeout_ms, e.max_attempts, r.replicate, e.genome"
                           " FROM runs u CROSS JOIN requests r"
                           " ON r.run_id = u.run_id AND r.tag >= u.acked_below"
                           " JOIN evaluations e ON e.key = r.key"
                           " LEFT JOIN results x ON x.rowid = (SELECT max(rowid) FROM results y"
                           "  WHERE y.run_id = r.run_id AND y.key = r.key AND y.fresh = 1)"
                           " WHERE r.fresh = 1 AND r.acked = 0 ORDER BY r.created",
                           -1, &st, NULL) != SQLITE_OK)
        return s_fail(db, "no-cache requests");
    int rc;
    while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
        const char *run_id = (const char *)sqlite3_column_text(st, 0);
        broker_run_t *run = run_id ? broker_runs_get(&b->runs, run_id) : NULL;
        const uint8_t *key = sqlite3_column_blob(st, 2);
        if (!run || sqlite3_column_bytes(st, 2) != PROTO_KEY_BYTES)
            continue;
        if (sqlite3_column_type(st, 3) != SQLITE_NULL)
            continue; /* answered: owed from the store */
        broker_eval_t *origin = broker_cache_lookup(b, key);
        if (!origin || origin->state != BROKER_EVAL_DONE)
            continue;
        uint64_t tag = s_u64(st, 1);
        broker_eval_t *f = broker_eval_again(origin);
        if (!f) {
            /* The cached origin keeps no genome (evals.h): the store's row. */
            f = broker_evals_new_fresh(&b->evals, origin, sqlite3_column_blob(st, 9),
                                       (uint32_t)sqlite3_column_bytes(st, 9));
            f->live->timeout_ms = (uint32_t)sqlite3_column_int64(st, 6);
            f->live->max_attempts = (uint16_t)sqlite3_column_int(st, 7);
        }
        if (s_waits(f, run, tag))
            continue;
        uint32_t replicate = (uint32_t)sqlite3_column_int64(st, 8);
        broker_eval_add_waiter(f, run, tag,
                               broker_run_request_seed(run, f->live->genome, f->live->genome_len, replicate));
        broker_run_count_request(run);
        if (!f->live->home) {
            broker_runs_enqueue(&b->runs, run, f, 0);
            broker_quota_charge(b, run, f);
            (*pending)++;
        }
    }
    return s_end(db, st, rc, "no-cache requests");
}

/* Sets b->ram_holds_all_results: 1 when the store holds no finished evaluation (a
 * new store, or one whose work never finished), which RAM then mirrors
 * until the first eviction. The scan stops at the first finished row. */
static int s_load_in_ram(broker_t *b, sqlite3 *db)
{
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(db, "SELECT 1 FROM evaluations WHERE status IS NOT NULL LIMIT 1", -1,
                           &st, NULL) != SQLITE_OK)
        return s_fail(db, "finished evaluations");
    int rc = sqlite3_step(st);
    b->ram_holds_all_results = rc == SQLITE_DONE;
    return s_end(db, st, rc == SQLITE_ROW ? SQLITE_DONE : rc, "finished evaluations");
}

int broker_store_load(broker_t *b)
{
    sqlite3 *db = broker_store_db(b->store);
    s_path = broker_store_path(b->store);
    uint32_t n_plugins = 0, n_runs = 0;
    uint64_t n_pending = 0;
    if (s_load_in_ram(b, db) != 0 || s_load_plugins(b, db, &n_plugins) != 0 ||
        s_load_runs(b, db, &n_runs) != 0 ||
        s_load_requests(b, db, &n_pending) != 0 || s_load_fresh(b, db, &n_pending) != 0 ||
        broker_backlog_load(b) != 0)
        return -1;
    if (n_runs || n_plugins)
        LOG_INFO("store loaded: %u plugins, %u runs with unacknowledged requests, %" PRIu64
                 " pending evaluations queued again (finished results and other runs stay in "
                 "the store and are read when asked for)",
                 n_plugins, n_runs, n_pending);
    return 0;
}
