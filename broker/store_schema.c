/* store_schema.c: the store's tables and the moves of older stores to the
 * current schema (see store_schema.h). Owns no state: store.c passes its
 * connection in. */
#include "store_schema.h"

#include <stdio.h>
#include <string.h>

#include "common/clock.h"
#include "common/log.h"
#include "store.h"

/* The plugins table of schema 3, here and in s_migrate_versions. */
#define S_PLUGINS_COLUMNS                                                                      \
    "(name TEXT NOT NULL, version TEXT NOT NULL, objectives INTEGER NOT NULL,"                 \
    " flags INTEGER NOT NULL, digests BLOB NOT NULL, last_seen REAL NOT NULL,"                 \
    " seed_params TEXT, param_defaults TEXT, first_seen REAL NOT NULL,"                        \
    " PRIMARY KEY(name, version))"

static const char s_schema[] =
    "CREATE TABLE IF NOT EXISTS meta(name TEXT PRIMARY KEY, value TEXT NOT NULL);"
    "CREATE TABLE IF NOT EXISTS runs("
    " run_id TEXT PRIMARY KEY, seed INTEGER NOT NULL, seed_mode INTEGER NOT NULL,"
    " created REAL NOT NULL, last_activity REAL NOT NULL, owner TEXT,"
    " acked_below INTEGER NOT NULL DEFAULT 0);"
    "CREATE TABLE IF NOT EXISTS evaluations("
    " key BLOB PRIMARY KEY, plugin TEXT NOT NULL, version TEXT NOT NULL,"
    " params TEXT NOT NULL, genome BLOB NOT NULL, seed INTEGER NOT NULL,"
    " timeout_ms INTEGER NOT NULL, max_attempts INTEGER NOT NULL, created REAL NOT NULL,"
    " status INTEGER, status_name TEXT, fitness BLOB, fitness_json TEXT, error TEXT,"
    " attempts INTEGER, worker TEXT, host TEXT, arch TEXT, digest BLOB,"
    " cpu_seconds REAL, peak_rss_kb INTEGER, finished_at REAL, run_id TEXT);"
    "CREATE TABLE IF NOT EXISTS requests("
    " run_id TEXT NOT NULL, tag INTEGER NOT NULL, batch_tag INTEGER NOT NULL,"
    " replicate INTEGER NOT NULL, key BLOB NOT NULL, cached INTEGER NOT NULL,"
    " acked INTEGER NOT NULL DEFAULT 0, created REAL NOT NULL,"
    " fresh INTEGER NOT NULL DEFAULT 0,"
    " PRIMARY KEY(run_id, tag)) WITHOUT ROWID;"
    /* A request is acknowledged when its tag is below its run's
     * runs.acked_below or its acked is 1 (store_sql.c, "Acknowledgements"): the
     * start finds pending work and owed results by reading each run's
     * requests from acked_below on, never by a pass over every request ever
     * made. Schema 2 dropped requests_by_key (on key): its only reader was
     * that pass, and with random keys it cost a random b-tree insert and
     * about 69 bytes per request. Schema 4 dropped requests_unacked (see
     * s_migrate_acked). */
    "DROP INDEX IF EXISTS requests_by_key;"
    "CREATE TABLE IF NOT EXISTS results("
    " key BLOB NOT NULL, run_id TEXT NOT NULL, fresh INTEGER NOT NULL,"
    " status INTEGER NOT NULL, status_name TEXT NOT NULL, fitness BLOB, fitness_json TEXT,"
    " error TEXT, attempts INTEGER, worker TEXT, host TEXT, arch TEXT, digest BLOB,"
    " cpu_seconds REAL, peak_rss_kb INTEGER, finished_at REAL NOT NULL);"
    "CREATE INDEX IF NOT EXISTS results_by_run ON results(run_id, key);"
    "CREATE TABLE IF NOT EXISTS plugins" S_PLUGINS_COLUMNS ";";

/* Every simulation that finished: the first evaluation of each key (in
 * evaluations, with the run that paid for it) and every re-evaluation (in
 * results). Made after s_migrate_history, which adds evaluations.run_id to
 * older stores. */
static const char s_simulations_view[] =
    "CREATE VIEW IF NOT EXISTS simulations AS"
    " SELECT key, run_id, 0 AS fresh, status, status_name, fitness, fitness_json, error,"
    " attempts, worker, host, arch, digest, cpu_seconds, peak_rss_kb, finished_at"
    " FROM evaluations WHERE status IS NOT NULL"
    " UNION ALL SELECT key, run_id, 1 AS fresh, status, status_name, fitness, fitness_json,"
    " error, attempts, worker, host, arch, digest, cpu_seconds, peak_rss_kb, finished_at"
    " FROM results";

/* Requests not acknowledged by their client (answered and owed, or not yet
 * answered): acked = 0 and at or above their run's mark (store_sql.c,
 * "Acknowledgements"). For readers of the file; the broker's own queries
 * spell the same condition out. Made after s_migrate_acked. */
static const char s_owed_view[] =
    "CREATE VIEW IF NOT EXISTS requests_owed AS SELECT r.* FROM runs u CROSS JOIN requests r"
    " ON r.run_id = u.run_id AND r.tag >= u.acked_below WHERE r.acked = 0";

/* SQLite's word for a file that is not a sound database. */
int broker_store_is_damage(int rc)
{
    rc &= 0xff;
    return rc == SQLITE_CORRUPT || rc == SQLITE_NOTADB;
}

int broker_store_exec(sqlite3 *db, const char *path, const char *sql)
{
    char *msg = NULL;
    int rc = sqlite3_exec(db, sql, NULL, NULL, &msg);
    if (rc != SQLITE_OK) {
        if (broker_store_is_damage(rc))
            broker_store_report_damage(path, sql, msg ? msg : sqlite3_errstr(rc));
        else
            LOG_ERROR("store %s: %s failed: %s", path, sql, msg ? msg : "?");
        sqlite3_free(msg);
        return -1;
    }
    return 0;
}

/* Moves the store to schema `to` in one transaction: steps (NULL-ended),
 * then meta.schema_version. A failure rolls everything back, so the file
 * stays as it was, and is logged. 0, or -1. */
static int s_move(sqlite3 *db, const char *path, int to, const char *const *steps)
{
    char version[96];
    snprintf(version, sizeof version,
             "UPDATE meta SET value = '%d' WHERE name = 'schema_version'", to);
    int rc = broker_store_exec(db, path, "BEGIN IMMEDIATE");
    for (size_t i = 0; rc == 0 && steps[i]; i++)
        rc = broker_store_exec(db, path, steps[i]);
    if (rc == 0)
        rc = broker_store_exec(db, path, version);
    if (rc == 0)
        rc = broker_store_exec(db, path, "COMMIT");
    if (rc != 0) {
        if (!sqlite3_get_autocommit(db))
            sqlite3_exec(db, "ROLLBACK", NULL, NULL, NULL);
        LOG_ERROR("store %s: cannot move it to schema %d (nothing changed: the transaction "
                  "rolled back)",
                  path, to);
        return -1;
    }
    return 0;
}

/* Schema 1 stores kept a copy of every first evaluation in the results
 * history and had no evaluations.run_id. Moves the paying run into
 * evaluations and drops the copies, in one transaction, once per store; a
 * store of a million evaluations takes seconds, logged. */
static int s_migrate_history(sqlite3 *db, const char *path)
{
    if (sqlite3_exec(db, "SELECT run_id FROM evaluations LIMIT 0", NULL, NULL, NULL) ==
        SQLITE_OK)
        return 0;
    static const char *const steps[] = {
        "ALTER TABLE evaluations ADD COLUMN run_id TEXT",
        "UPDATE evaluations SET run_id = (SELECT y.run_id FROM results y"
        " WHERE y.key = evaluations.key AND y.fresh = 0 ORDER BY y.rowid LIMIT 1)"
        " WHERE status IS NOT NULL",
        "DELETE FROM results WHERE fresh = 0",
        NULL};
    int64_t t0 = common_clock_ms();
    if (s_move(db, path, 2, steps) != 0)
        return -1;
    LOG_INFO("store %s moved to schema 2 in %.1f s: the results history keeps re-evaluations "
             "only; first evaluations name their run in evaluations.run_id",
             path, (double)(common_clock_ms() - t0) / 1000.0);
    return 0;
}

/* Schema 2 stores keyed plugins by name alone (one version per name, the
 * first one seen). Rebuilds the table keyed by name and version, its rows
 * first_seen = last_seen (one version each: nothing to order), and sets
 * schema_version 3, in one transaction, once per store. A table has a few
 * rows: this takes milliseconds. */
static int s_migrate_versions(sqlite3 *db, const char *path)
{
    if (sqlite3_exec(db, "SELECT first_seen FROM plugins LIMIT 0", NULL, NULL, NULL) ==
        SQLITE_OK)
        return 0;
    static const char *const steps[] = {
        "CREATE TABLE plugins_v3" S_PLUGINS_COLUMNS,
        "INSERT INTO plugins_v3(name, version, objectives, flags, digests,"
        " last_seen, seed_params, param_defaults, first_seen)"
        " SELECT name, version, objectives, flags, digests, last_seen, seed_params,"
        " param_defaults, last_seen FROM plugins ORDER BY rowid",
        "DROP TABLE plugins",
        "ALTER TABLE plugins_v3 RENAME TO plugins",
        NULL};
    if (s_move(db, path, 3, steps) != 0)
        return -1;
    LOG_INFO("store %s moved to schema 3: plugins are kept per name and version (a plugin "
             "given without a version still means the one this store saw first)",
             path);
    return 0;
}

/* Schema 3 stores marked every acknowledged request acked = 1 and found the
 * rest through the partial index requests_unacked (acked = 0), so each
 * request cost an index entry and each acknowledgement a row write and an
 * index delete. Schema 4 keeps, per run, the tag below which every request
 * is acknowledged (runs.acked_below). Sets it for each run from the index
 * (the run's first unacknowledged tag, else one past its last), drops the
 * index and sets schema_version 4, in one transaction, once per store. Reads
 * one index entry per run: milliseconds even for millions of requests. */
static int s_migrate_acked(sqlite3 *db, const char *path)
{
    if (sqlite3_exec(db, "SELECT acked_below FROM runs LIMIT 0", NULL, NULL, NULL) == SQLITE_OK)
        return 0;
    static const char *const steps[] = {
        "ALTER TABLE runs ADD COLUMN acked_below INTEGER NOT NULL DEFAULT 0",
        "UPDATE runs SET acked_below = coalesce("
        "(SELECT min(r.tag) FROM requests r WHERE r.run_id = runs.run_id AND r.acked = 0),"
        " (SELECT max(r.tag) + 1 FROM requests r WHERE r.run_id = runs.run_id), 0)",
        "DROP INDEX IF EXISTS requests_unacked",
        NULL};
    int64_t t0 = common_clock_ms();
    if (s_move(db, path, 4, steps) != 0)
        return -1;
    LOG_INFO("store %s moved to schema 4 in %.1f s: each run records the tag below which its "
             "requests are acknowledged (runs.acked_below); a broker older than this one must "
             "not open the store again",
             path, (double)(common_clock_ms() - t0) / 1000.0);
    return 0;
}

/* A store a newer broker moved past this one's schema: its rows may mean
 * what this broker cannot read (schema 4's acknowledgements, for one). */
static int s_refuse_newer(sqlite3 *db, const char *path)
{
    sqlite3_stmt *st = NULL;
    int version = 0;
    if (sqlite3_prepare_v2(db, "SELECT value FROM meta WHERE name = 'schema_version'", -1, &st,
                           NULL) == SQLITE_OK &&
        sqlite3_step(st) == SQLITE_ROW)
        version = sqlite3_column_int(st, 0);
    sqlite3_finalize(st);
    if (version > STORE_SCHEMA_VERSION) {
        LOG_ERROR("store %s has schema %d, made by a newer fitfarm-broker; this one reads "
                  "schema %d and older. Start the newer broker on it (nothing was changed)",
                  path, version, STORE_SCHEMA_VERSION);
        return -1;
    }
    return 0;
}

int broker_store_schema_apply(sqlite3 *db, const char *path)
{
    if (s_refuse_newer(db, path) != 0 || broker_store_exec(db, path, s_schema) != 0 ||
        broker_store_exec(db, path, "BEGIN IMMEDIATE") != 0)
        return -1;
    char sql[128];
    snprintf(sql, sizeof sql, "INSERT OR IGNORE INTO meta VALUES('schema_version', '%d')",
             STORE_SCHEMA_VERSION);
    if (broker_store_exec(db, path, sql) != 0 || broker_store_exec(db, path, "COMMIT") != 0)
        return -1;
    /* Stores made before re-evaluations were kept apart lack requests.fresh. */
    if (sqlite3_exec(db, "SELECT fresh FROM requests LIMIT 0", NULL, NULL, NULL) !=
            SQLITE_OK &&
        broker_store_exec(db, path, "ALTER TABLE requests ADD COLUMN fresh INTEGER NOT NULL DEFAULT 0") != 0)
        return -1;
    /* Stores made before plugins listed seed params lack plugins.seed_params
     * (NULL there means "not recorded": the next HELLO fills it). */
    if (sqlite3_exec(db, "SELECT seed_params FROM plugins LIMIT 0", NULL, NULL, NULL) !=
            SQLITE_OK &&
        broker_store_exec(db, path, "ALTER TABLE plugins ADD COLUMN seed_params TEXT") != 0)
        return -1;
    /* ... and plugins.param_defaults (NULL: not recorded, filled likewise). */
    if (sqlite3_exec(db, "SELECT param_defaults FROM plugins LIMIT 0", NULL, NULL, NULL) !=
            SQLITE_OK &&
        broker_store_exec(db, path, "ALTER TABLE plugins ADD COLUMN param_defaults TEXT") != 0)
        return -1;
    /* Stores made before runs had owners lack runs.owner (NULL there means
     * "not recorded": access.h says who may claim such a run). */
    if (sqlite3_exec(db, "SELECT owner FROM runs LIMIT 0", NULL, NULL, NULL) !=
            SQLITE_OK &&
        broker_store_exec(db, path, "ALTER TABLE runs ADD COLUMN owner TEXT") != 0)
        return -1;
    if (s_migrate_history(db, path) != 0 || s_migrate_versions(db, path) != 0 ||
        s_migrate_acked(db, path) != 0 ||
        broker_store_exec(db, path, s_simulations_view) != 0 ||
        broker_store_exec(db, path, s_owed_view) != 0)
        return -1;
    return 0;
}