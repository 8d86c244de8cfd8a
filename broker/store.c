/* store.c: the durable store (see store.h): opening the SQLite database, its
 * schema, the prepared statements for each note, and the group commit. Owns
 * the connection and the statements. Not here: rebuilding the broker's state
 * at start (store_load.c).
 *
 * Durability: journal_mode=WAL, synchronous=FULL. In WAL mode FULL fsyncs
 * the log at every COMMIT, so "accepted" survives a power cut as well as a
 * killed process; NORMAL would survive a killed process only. FULL is the
 * safe reading of "accepted means durable"; it was not timed against NORMAL.
 * With it, tests/bench/bench_throughput on our 2-core machine gives 25,000 to
 * 44,000 trivial evaluations/s and a single-evaluation round trip of 415 to
 * 620 us, one fsync per loop turn included (commits cover a whole turn).
 *
 * u64 values (seeds, tags) are stored as SQLite INTEGER by a two's-complement
 * cast: a value >= 2^63 reads back negative in the sqlite3 shell (add
 * 18446744073709551616 to see it unsigned); the broker casts back exactly. */
#include "store.h"

#include <errno.h>
#include <inttypes.h>
#include <jansson.h>
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/log.h"
#include "params.h"
#include "store_lock.h"

#define STORE_FILE "fitfarm.db"
#define STORE_SCHEMA_VERSION 1

static const char s_schema[] =
    "CREATE TABLE IF NOT EXISTS meta(name TEXT PRIMARY KEY, value TEXT NOT NULL);"
    "CREATE TABLE IF NOT EXISTS runs("
    " run_id TEXT PRIMARY KEY, seed INTEGER NOT NULL, seed_mode INTEGER NOT NULL,"
    " created REAL NOT NULL, last_activity REAL NOT NULL, owner TEXT);"
    "CREATE TABLE IF NOT EXISTS evaluations("
    " key BLOB PRIMARY KEY, plugin TEXT NOT NULL, version TEXT NOT NULL,"
    " params TEXT NOT NULL, genome BLOB NOT NULL, seed INTEGER NOT NULL,"
    " timeout_ms INTEGER NOT NULL, max_attempts INTEGER NOT NULL, created REAL NOT NULL,"
    " status INTEGER, status_name TEXT, fitness BLOB, fitness_json TEXT, error TEXT,"
    " attempts INTEGER, worker TEXT, host TEXT, arch TEXT, digest BLOB,"
    " cpu_seconds REAL, peak_rss_kb INTEGER, finished_at REAL);"
    "CREATE TABLE IF NOT EXISTS requests("
    " run_id TEXT NOT NULL, tag INTEGER NOT NULL, batch_tag INTEGER NOT NULL,"
    " replicate INTEGER NOT NULL, key BLOB NOT NULL, cached INTEGER NOT NULL,"
    " acked INTEGER NOT NULL DEFAULT 0, created REAL NOT NULL,"
    " fresh INTEGER NOT NULL DEFAULT 0,"
    " PRIMARY KEY(run_id, tag)) WITHOUT ROWID;"
    "CREATE INDEX IF NOT EXISTS requests_by_key ON requests(key);"
    "CREATE TABLE IF NOT EXISTS results("
    " key BLOB NOT NULL, run_id TEXT NOT NULL, fresh INTEGER NOT NULL,"
    " status INTEGER NOT NULL, status_name TEXT NOT NULL, fitness BLOB, fitness_json TEXT,"
    " error TEXT, attempts INTEGER, worker TEXT, host TEXT, arch TEXT, digest BLOB,"
    " cpu_seconds REAL, peak_rss_kb INTEGER, finished_at REAL NOT NULL);"
    "CREATE INDEX IF NOT EXISTS results_by_run ON results(run_id, key);"
    "CREATE TABLE IF NOT EXISTS plugins("
    " name TEXT PRIMARY KEY, version TEXT NOT NULL, objectives INTEGER NOT NULL,"
    " flags INTEGER NOT NULL, digests BLOB NOT NULL, last_seen REAL NOT NULL,"
    " seed_params TEXT);";

enum {
    S_BEGIN,
    S_COMMIT,
    S_RUN,
    S_EVAL,
    S_HISTORY,
    S_REQUEST,
    S_FIND_REQUEST,
    S_FIND_FRESH,
    S_RESULT,
    S_ACK,
    S_UNACK,
    S_PLUGIN,
    S_FIND_RUN,
    S_COUNT_
};

static const char *const s_sql[S_COUNT_] = {
    [S_BEGIN] = "BEGIN",
    [S_COMMIT] = "COMMIT",
    [S_RUN] = "INSERT INTO runs(run_id, seed, seed_mode, created, last_activity, owner)"
              " VALUES(?1, ?2, ?3, ?4, ?4, ?5)"
              " ON CONFLICT(run_id) DO UPDATE SET last_activity = ?4, owner = ?5",
    [S_EVAL] = "INSERT OR IGNORE INTO evaluations(key, plugin, version, params, genome, seed,"
               " timeout_ms, max_attempts, created) VALUES(?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
    [S_HISTORY] = "INSERT INTO results(key, run_id, fresh, status, status_name, fitness,"
                  " fitness_json, error, attempts, worker, host, arch, digest, cpu_seconds,"
                  " peak_rss_kb, finished_at) VALUES(?1, ?15, ?16, ?2, ?3, ?4, ?5, ?6, ?7, ?8,"
                  " ?9, ?10, ?11, ?12, ?13, ?14)",
    [S_REQUEST] = "INSERT OR IGNORE INTO requests(run_id, tag, batch_tag, replicate, key, cached,"
                  " created, fresh) VALUES(?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
    [S_FIND_REQUEST] = "SELECT key, cached, fresh FROM requests WHERE run_id = ?1 AND tag = ?2",
    [S_FIND_FRESH] = "SELECT status, fitness, error FROM results WHERE run_id = ?1 AND key = ?2"
                     " AND fresh = 1 ORDER BY rowid DESC LIMIT 1",
    [S_RESULT] = "UPDATE evaluations SET status = ?2, status_name = ?3, fitness = ?4,"
                 " fitness_json = ?5, error = ?6, attempts = ?7, worker = ?8, host = ?9,"
                 " arch = ?10, digest = ?11, cpu_seconds = ?12, peak_rss_kb = ?13,"
                 " finished_at = ?14 WHERE key = ?1",
    [S_ACK] = "UPDATE requests SET acked = 1 WHERE run_id = ?1 AND tag = ?2",
    [S_UNACK] = "UPDATE requests SET acked = 0 WHERE run_id = ?1 AND tag = ?2 AND acked = 1",
    [S_PLUGIN] = "INSERT INTO plugins(name, version, objectives, flags, digests, last_seen,"
                 " seed_params) VALUES(?1, ?2, ?3, ?4, ?5, ?6, ?7) ON CONFLICT(name) DO UPDATE"
                 " SET version = ?2, objectives = ?3, flags = ?4, digests = ?5, last_seen = ?6,"
                 " seed_params = ?7",
    [S_FIND_RUN] = "SELECT seed, seed_mode, owner FROM runs WHERE run_id = ?1",
};

struct broker_store {
    sqlite3 *db;
    sqlite3_stmt *stmt[S_COUNT_];
    int in_txn;
    int lock_fd; /* DIR/fitfarm.lock, flock'ed for the broker's life; -1 in memory */
    uint64_t commits;
    uint64_t write_errors;
    char path[4096];
};

static double s_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec / 1e9;
}

sqlite3 *broker_store_db(broker_store_t *self)
{
    return self->db;
}

uint64_t broker_store_commits(const broker_store_t *self)
{
    return self ? self->commits : 0;
}

static int s_exec(broker_store_t *self, const char *sql)
{
    char *msg = NULL;
    if (sqlite3_exec(self->db, sql, NULL, NULL, &msg) != SQLITE_OK) {
        LOG_ERROR("store %s: %s failed: %s", self->path, sql, msg ? msg : "?");
        sqlite3_free(msg);
        return -1;
    }
    return 0;
}

broker_store_t *broker_store_open(const char *dir, int scratch, int lock_wait_ms)
{
    broker_store_t *self = common_xcalloc(1, sizeof *self);
    self->lock_fd = -1;
    if (dir) {
        if (mkdir(dir, 0700) != 0 && errno != EEXIST) {
            LOG_ERROR("cannot create the store folder %s: %s", dir, strerror(errno));
            goto fail;
        }
        /* Two brokers on one store would each tell clients a different
         * story: the second one waits a little (a killed predecessor may
         * still be ending), then refuses to start (store_lock.h). */
        self->lock_fd = broker_store_lock(dir, lock_wait_ms);
        if (self->lock_fd < 0)
            goto fail;
        snprintf(self->path, sizeof self->path, "%s/%s", dir, STORE_FILE);
    } else {
        snprintf(self->path, sizeof self->path, ":memory:");
    }
    if (sqlite3_open_v2(self->path, &self->db,
                        SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE | SQLITE_OPEN_NOMUTEX,
                        NULL) != SQLITE_OK) {
        LOG_ERROR("cannot open the store %s: %s", self->path,
                  self->db ? sqlite3_errmsg(self->db) : "out of memory");
        goto fail;
    }
    sqlite3_busy_timeout(self->db, 2000); /* a reader checkpointing, at most */
    if (s_exec(self, "PRAGMA journal_mode=WAL") != 0 ||
        s_exec(self, scratch ? "PRAGMA synchronous=OFF" : "PRAGMA synchronous=FULL") != 0 ||
        s_exec(self, s_schema) != 0 ||
        s_exec(self, "BEGIN IMMEDIATE") != 0)
        goto fail;
    char sql[128];
    snprintf(sql, sizeof sql, "INSERT OR IGNORE INTO meta VALUES('schema_version', '%d')",
             STORE_SCHEMA_VERSION);
    if (s_exec(self, sql) != 0 || s_exec(self, "COMMIT") != 0)
        goto fail;
    /* Stores made before re-evaluations were kept apart lack requests.fresh. */
    if (sqlite3_exec(self->db, "SELECT fresh FROM requests LIMIT 0", NULL, NULL, NULL) !=
            SQLITE_OK &&
        s_exec(self, "ALTER TABLE requests ADD COLUMN fresh INTEGER NOT NULL DEFAULT 0") != 0)
        goto fail;
    /* Stores made before plugins listed seed params lack plugins.seed_params
     * (NULL there means "not recorded": the next HELLO fills it). */
    if (sqlite3_exec(self->db, "SELECT seed_params FROM plugins LIMIT 0", NULL, NULL, NULL) !=
            SQLITE_OK &&
        s_exec(self, "ALTER TABLE plugins ADD COLUMN seed_params TEXT") != 0)
        goto fail;
    /* Stores made before runs had owners lack runs.owner (NULL there means
     * "not recorded": access.h says who may claim such a run). */
    if (sqlite3_exec(self->db, "SELECT owner FROM runs LIMIT 0", NULL, NULL, NULL) !=
            SQLITE_OK &&
        s_exec(self, "ALTER TABLE runs ADD COLUMN owner TEXT") != 0)
        goto fail;
    for (int i = 0; i < S_COUNT_; i++) {
        if (sqlite3_prepare_v3(self->db, s_sql[i], -1, SQLITE_PREPARE_PERSISTENT, &self->stmt[i],
                               NULL) != SQLITE_OK) {
            LOG_ERROR("store %s: cannot prepare \"%s\": %s", self->path, s_sql[i],
                      sqlite3_errmsg(self->db));
            goto fail;
        }
    }
    if (dir)
        LOG_INFO("store %s open (WAL, synchronous=%s)", self->path,
                 scratch ? "OFF: a scratch store" : "FULL");
    return self;
fail:
    broker_store_close(&self);
    return NULL;
}

void broker_store_close(broker_store_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    broker_store_t *self = *self_p;
    if (self->db && self->in_txn)
        (void)broker_store_commit(self);
    for (int i = 0; i < S_COUNT_; i++)
        sqlite3_finalize(self->stmt[i]);
    if (self->db)
        sqlite3_close(self->db);
    if (self->lock_fd >= 0)
        close(self->lock_fd); /* releases the flock */
    free(self);
    *self_p = NULL;
}

/* Runs a prepared write statement (bound by the caller) inside the turn's
 * transaction, opening it if needed; resets it. */
static void s_step(broker_store_t *self, int which)
{
    sqlite3_stmt *st = self->stmt[which];
    if (!self->in_txn) {
        sqlite3_stmt *b = self->stmt[S_BEGIN];
        if (sqlite3_step(b) == SQLITE_DONE)
            self->in_txn = 1;
        else
            LOG_ERROR("store %s: BEGIN failed: %s", self->path, sqlite3_errmsg(self->db));
        sqlite3_reset(b);
    }
    int rc = sqlite3_step(st);
    if (rc != SQLITE_DONE && rc != SQLITE_ROW) {
        /* One line per hundred failures: a full disk must not flood the log. */
        if (self->write_errors++ % 100 == 0)
            LOG_ERROR("store %s: write failed (%" PRIu64 " so far): %s", self->path,
                      self->write_errors, sqlite3_errmsg(self->db));
    }
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
}

static void s_bind_u64(sqlite3_stmt *st, int i, uint64_t v)
{
    sqlite3_bind_int64(st, i, (sqlite3_int64)v); /* two's-complement cast, see top */
}

void broker_store_note_run(broker_store_t *self, const broker_run_t *run)
{
    sqlite3_stmt *st = self->stmt[S_RUN];
    sqlite3_bind_text(st, 1, run->id, -1, SQLITE_STATIC);
    s_bind_u64(st, 2, run->seed);
    sqlite3_bind_int(st, 3, (int)run->seed_mode);
    sqlite3_bind_double(st, 4, s_now());
    if (run->owner[0])
        sqlite3_bind_text(st, 5, run->owner, -1, SQLITE_STATIC);
    else
        sqlite3_bind_null(st, 5);
    s_step(self, S_RUN);
}

void broker_store_note_eval(broker_store_t *self, const broker_eval_t *e)
{
    sqlite3_stmt *st = self->stmt[S_EVAL];
    sqlite3_bind_blob(st, 1, e->key, PROTO_KEY_BYTES, SQLITE_STATIC);
    sqlite3_bind_text(st, 2, e->plugin->name, -1, SQLITE_STATIC);
    sqlite3_bind_text(st, 3, e->plugin->version, -1, SQLITE_STATIC);
    sqlite3_bind_text(st, 4, e->params, -1, SQLITE_STATIC);
    sqlite3_bind_blob(st, 5, e->genome, (int)e->genome_len, SQLITE_STATIC);
    s_bind_u64(st, 6, e->seed);
    sqlite3_bind_int64(st, 7, e->timeout_ms);
    sqlite3_bind_int(st, 8, e->max_attempts);
    sqlite3_bind_double(st, 9, s_now());
    s_step(self, S_EVAL);
}

void broker_store_note_request(broker_store_t *self, const broker_run_t *run, uint64_t tag,
                               uint64_t batch_tag, uint32_t replicate, const broker_eval_t *e,
                               int cached)
{
    sqlite3_stmt *st = self->stmt[S_REQUEST];
    sqlite3_bind_text(st, 1, run->id, -1, SQLITE_STATIC);
    s_bind_u64(st, 2, tag);
    s_bind_u64(st, 3, batch_tag);
    sqlite3_bind_int64(st, 4, replicate);
    sqlite3_bind_blob(st, 5, e->key, PROTO_KEY_BYTES, SQLITE_STATIC);
    sqlite3_bind_int(st, 6, cached != 0);
    sqlite3_bind_double(st, 7, s_now());
    sqlite3_bind_int(st, 8, e->fresh != 0);
    s_step(self, S_REQUEST);
}

int broker_store_find_run(broker_store_t *self, const char *run_id, uint64_t *seed,
                          uint32_t *seed_mode, char *owner, size_t owner_len)
{
    sqlite3_stmt *st = self->stmt[S_FIND_RUN];
    sqlite3_bind_text(st, 1, run_id, -1, SQLITE_STATIC);
    int found = 0;
    if (sqlite3_step(st) == SQLITE_ROW) {
        const char *o = (const char *)sqlite3_column_text(st, 2);
        *seed = (uint64_t)sqlite3_column_int64(st, 0);
        *seed_mode = (uint32_t)sqlite3_column_int(st, 1);
        /* An owner the broker did not write (too long, empty) matches no key. */
        snprintf(owner, owner_len, "%s", !o ? "" : (!*o || strlen(o) >= owner_len) ? "?" : o);
        found = 1;
    }
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return found;
}

int broker_store_find_request(broker_store_t *self, const char *run_id, uint64_t tag,
                              uint8_t key[PROTO_KEY_BYTES], int *cached, int *fresh)
{
    sqlite3_stmt *st = self->stmt[S_FIND_REQUEST];
    sqlite3_bind_text(st, 1, run_id, -1, SQLITE_STATIC);
    s_bind_u64(st, 2, tag);
    int found = 0;
    if (sqlite3_step(st) == SQLITE_ROW && sqlite3_column_bytes(st, 0) == PROTO_KEY_BYTES) {
        memcpy(key, sqlite3_column_blob(st, 0), PROTO_KEY_BYTES);
        *cached = sqlite3_column_int(st, 1);
        *fresh = sqlite3_column_int(st, 2);
        found = 1;
    }
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return found;
}

int broker_store_find_fresh_result(broker_store_t *self, const char *run_id,
                                   const uint8_t key[PROTO_KEY_BYTES], uint32_t *status,
                                   double *fitness, uint32_t *n_fitness, char *err, size_t errlen)
{
    sqlite3_stmt *st = self->stmt[S_FIND_FRESH];
    sqlite3_bind_text(st, 1, run_id, -1, SQLITE_STATIC);
    sqlite3_bind_blob(st, 2, key, PROTO_KEY_BYTES, SQLITE_STATIC);
    int found = 0;
    if (sqlite3_step(st) == SQLITE_ROW) {
        *status = (uint32_t)sqlite3_column_int(st, 0);
        const uint8_t *le = sqlite3_column_blob(st, 1);
        uint32_t nf = (uint32_t)(sqlite3_column_bytes(st, 1) / 8);
        if (nf > PROTO_MAX_OBJECTIVES)
            nf = PROTO_MAX_OBJECTIVES;
        for (uint32_t i = 0; i < nf; i++) {
            uint64_t bits = 0;
            for (int k = 0; k < 8; k++)
                bits |= (uint64_t)le[i * 8 + (uint32_t)k] << (8 * k);
            memcpy(&fitness[i], &bits, 8);
        }
        *n_fitness = nf;
        const char *e = (const char *)sqlite3_column_text(st, 2);
        snprintf(err, errlen, "%s", e ? e : "");
        found = 1;
    }
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return found;
}

/* "[1.5, -2]" with 17 significant digits (null for a non-finite value). */
static char *s_fitness_json(const double *f, uint32_t n)
{
    char *out = common_xmalloc((size_t)n * 34 + 3);
    size_t used = 0;
    out[used++] = '[';
    for (uint32_t i = 0; i < n; i++) {
        char num[32];
        proto_format_double(f[i], num); /* null for a non-finite value */
        used += (size_t)sprintf(out + used, "%s%s", i ? ", " : "", num);
    }
    out[used++] = ']';
    out[used] = '\0';
    return out;
}

/* Binds one result to S_RESULT or S_HISTORY (same parameter numbers). */
static void s_bind_result(broker_store_t *self, int which, const broker_eval_t *e,
                          const proto_outcome_t *o, const char *worker, const char *host,
                          const char *arch);

void broker_store_note_result(broker_store_t *self, const broker_eval_t *e,
                              const proto_outcome_t *o, const char *worker, const char *host,
                              const char *arch)
{
    /* The cache row changes only for a first evaluation; a no-cache
     * re-evaluation leaves it as it was. Every result, either kind, is
     * appended to the results history with the run that paid for it. */
    if (!e->fresh)
        s_bind_result(self, S_RESULT, e, o, worker, host, arch);
    s_bind_result(self, S_HISTORY, e, o, worker, host, arch);
}

static void s_bind_result(broker_store_t *self, int which, const broker_eval_t *e,
                          const proto_outcome_t *o, const char *worker, const char *host,
                          const char *arch)
{
    sqlite3_stmt *st = self->stmt[which];
    uint8_t *le = NULL;
    char *json = NULL;
    sqlite3_bind_blob(st, 1, e->key, PROTO_KEY_BYTES, SQLITE_STATIC);
    sqlite3_bind_int(st, 2, e->status);
    sqlite3_bind_text(st, 3, proto_status_name(e->status), -1, SQLITE_STATIC);
    if (e->n_fitness) {
        /* Little-endian IEEE 754 doubles, whatever the host. */
        le = common_xmalloc((size_t)e->n_fitness * 8);
        for (uint32_t i = 0; i < e->n_fitness; i++) {
            uint64_t bits;
            memcpy(&bits, &e->fitness[i], 8);
            for (int k = 0; k < 8; k++)
                le[i * 8 + (uint32_t)k] = (uint8_t)(bits >> (8 * k));
        }
        sqlite3_bind_blob(st, 4, le, (int)e->n_fitness * 8, SQLITE_STATIC);
        json = s_fitness_json(e->fitness, e->n_fitness);
        sqlite3_bind_text(st, 5, json, -1, SQLITE_STATIC);
    }
    sqlite3_bind_text(st, 6, e->error ? e->error : "", -1, SQLITE_STATIC);
    /* attempts counts dispatches that crashed or timed out; the final one
     * counts too when it ended the same way. */
    sqlite3_bind_int(st, 7, e->attempts);
    if (worker) {
        sqlite3_bind_text(st, 8, worker, -1, SQLITE_STATIC);
        sqlite3_bind_text(st, 9, host, -1, SQLITE_STATIC);
        sqlite3_bind_text(st, 10, arch, -1, SQLITE_STATIC);
    }
    /* Only workers with the plugin's pinned build get its jobs (catalog.h),
     * so the pinned digest is the build that computed this result. */
    if (worker && e->plugin->n_digests > 0)
        sqlite3_bind_blob(st, 11, e->plugin->digests[0], PROTO_DIGEST_BYTES, SQLITE_STATIC);
    if (o) {
        sqlite3_bind_double(st, 12, o->cpu_seconds);
        s_bind_u64(st, 13, o->peak_rss_kb);
    }
    sqlite3_bind_double(st, 14, s_now());
    if (which == S_HISTORY) {
        sqlite3_bind_text(st, 15, e->home ? e->home->id : "", -1, SQLITE_STATIC);
        sqlite3_bind_int(st, 16, e->fresh != 0);
    }
    s_step(self, which);
    free(le);
    free(json);
}

void broker_store_note_ack(broker_store_t *self, const broker_run_t *run, uint64_t tag)
{
    sqlite3_stmt *st = self->stmt[S_ACK];
    sqlite3_bind_text(st, 1, run->id, -1, SQLITE_STATIC);
    s_bind_u64(st, 2, tag);
    s_step(self, S_ACK);
}

void broker_store_note_unack(broker_store_t *self, const broker_run_t *run, uint64_t tag)
{
    sqlite3_stmt *st = self->stmt[S_UNACK];
    sqlite3_bind_text(st, 1, run->id, -1, SQLITE_STATIC);
    s_bind_u64(st, 2, tag);
    s_step(self, S_UNACK);
}

void broker_store_note_plugin(broker_store_t *self, const broker_plugin_t *p)
{
    sqlite3_stmt *st = self->stmt[S_PLUGIN];
    sqlite3_bind_text(st, 1, p->name, -1, SQLITE_STATIC);
    sqlite3_bind_text(st, 2, p->version, -1, SQLITE_STATIC);
    sqlite3_bind_int64(st, 3, p->objectives);
    sqlite3_bind_int64(st, 4, p->flags);
    sqlite3_bind_blob(st, 5, p->digests, (int)(p->n_digests * PROTO_DIGEST_BYTES),
                      SQLITE_STATIC);
    sqlite3_bind_double(st, 6, s_now());
    /* seed params as a JSON array of names; NULL while not known */
    char *seeds = NULL;
    if (p->seed_params_known) {
        json_t *a = json_array();
        for (uint32_t i = 0; a && i < p->n_seed_params; i++)
            json_array_append_new(a, json_string(p->seed_params[i]));
        /* out of memory gives NULL: recorded as not known, refilled by a HELLO */
        seeds = a ? json_dumps(a, JSON_COMPACT) : NULL;
        json_decref(a);
    }
    if (seeds)
        sqlite3_bind_text(st, 7, seeds, -1, SQLITE_TRANSIENT);
    else
        sqlite3_bind_null(st, 7);
    free(seeds);
    s_step(self, S_PLUGIN);
}

int broker_store_commit(broker_store_t *self)
{
    if (!self->in_txn)
        return 0;
    sqlite3_stmt *st = self->stmt[S_COMMIT];
    int rc = sqlite3_step(st);
    sqlite3_reset(st);
    if (rc != SQLITE_DONE) {
        /* The transaction stays open; the next turn's commit tries again. */
        LOG_ERROR("store %s: commit failed: %s", self->path, sqlite3_errmsg(self->db));
        return -1;
    }
    self->in_txn = 0;
    self->commits++;
    return 0;
}
