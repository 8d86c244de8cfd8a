/* store.c: the durable store (see store.h): opening the SQLite database, the
 * prepared statements for each note, and the group commit. Owns the
 * connection and the statements. Not here: the statements' text
 * (store_sql.c), the tables and the moves of older stores (store_schema.c),
 * rebuilding the broker's state at start (store_load.c).
 *
 * Durability: journal_mode=WAL, synchronous=FULL. In WAL mode FULL fsyncs
 * the log at every COMMIT, so "accepted" survives a power cut as well as a
 * killed process; NORMAL would survive a killed process only. FULL is the
 * safe reading of "accepted means durable"; it was not timed against NORMAL.
 * With it, tests/bench/bench_throughput on our 2-core machine gives 25,000 to
 * 44,000 trivial evaluations/s and a single-evaluation round trip of 415 to
 * 620 us, one fsync per loop turn included (commits cover a whole turn).
 *
 * A scratch store (the embedded pool's private one, thrown away after use)
 * keeps its rollback journal in memory (journal_mode=MEMORY) and does not
 * fsync: a failed commit still rolls back (the sticky failures below hold),
 * only a machine crash could damage it, and then it is gone anyway. Nobody
 * else opens it, so WAL's concurrent readers are not needed; not writing a
 * WAL saved 0.3-0.6 ms per generation of 150 (tests/bench/
 * bench_python_map.py: 4.96 and 5.36 ms with WAL, 4.38 and 4.70 ms with it).
 *
 * Sticky failures, as SQLite's own pager treats an I/O error: the first
 * failed write, BEGIN or COMMIT of a turn fails the whole turn. The
 * transaction is rolled back (SQLite may have done it already:
 * sqlite3_get_autocommit says), so the file holds exactly what the last
 * successful commit made; every write since is kept in store_log.h's log and
 * the whole of it is written again in one transaction by a later commit,
 * paced by a doubling back-off. Until that commits the loop sends nothing
 * that depends on it, dispatches no new jobs and refuses new batches
 * (loop.c, client_io.c), so no client ever holds an ACCEPTED or a result
 * that the file does not.
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
#include "common/clock.h"
#include "common/log.h"
#include "params.h"
#include "store_hook.h"
#include "store_lock.h"
#include "store_log.h"
#include "store_sql.h"
#include "store_schema.h"

#define STORE_FILE "fitfarm.db"
/* SQLite's page cache, in KiB (negative cache_size means KiB). Its default,
 * 2 MiB, holds a few thousand pages: past it every lookup of a cached
 * result and every update of a random-keyed b-tree page read the page back
 * from the WAL with pread. 64 MiB covers the b-tree pages of about a million
 * evaluations; tests/bench/bench_throughput --store DIR measured answers from
 * the cache at 70,000-73,000/s with the default and 102,000-113,000/s with
 * this, in alternating runs of one session. */
#define STORE_CACHE_KIB "65536"


/* Retry pacing while the store cannot write: the first retry soon (a
 * checkpoint may free WAL space at once), then doubling up to a ceiling low
 * enough that a broker whose disk was cleaned resumes within seconds.
 * One log line per STORE_REPORT_MS while it lasts (common practice: a
 * repeating failure is reported with a count, not once per attempt). */
#define STORE_RETRY_FIRST_MS 100
#define STORE_RETRY_MAX_MS 5000
#define STORE_REPORT_MS 5000

/* New requests are written STORE_REQUEST_ROWS to a statement (one INSERT
 * with that many rows) rather than one statement each: a generation's
 * requests are most of what a batch answered from the cache writes, and
 * each statement costs a program start, its cursors and its halt. They wait
 * in the log (at most one statement's worth) until the statement is full,
 * or until anything that reads or changes requests runs (s_flush_requests),
 * so every read sees them. */
#define STORE_REQUEST_ROWS 64

struct broker_store {
    sqlite3 *db;
    sqlite3_stmt *stmt[S_COUNT_];
    sqlite3_stmt *requests_many; /* S_REQUEST for STORE_REQUEST_ROWS rows */
    int request_columns;         /* S_REQUEST's parameters, one row's worth */
    size_t pend[STORE_REQUEST_ROWS]; /* log indexes of S_REQUEST ops not yet written */
    size_t n_pend;
    int lock_fd; /* DIR/fitfarm.lock, flock'ed for the broker's life; -1 in memory */
    uint64_t commits;
    broker_hist_t commit_times; /* successful COMMITs, seconds (metrics.c) */
    /* Every write since the last successful commit (store_log.h), and what
     * it holds in the user's terms. */
    broker_store_log_t log;
    uint64_t log_results, log_requests;
    /* Of those, the writes an answer may depend on (all but
     * acknowledgements), and when the first acknowledgement left waiting
     * was noted (0: none): see broker_store_commit_due_in_ms. */
    uint64_t log_must;
    int64_t lazy_since_ms;
    int64_t must_since_us; /* when the first of log_must was noted */
    /* Sticky failure: fail_rc != 0 from the first failed write or commit
     * until a retry of the whole log commits. */
    int fail_rc;
    char fail_msg[256];
    int64_t fail_since_ms, retry_at_ms, backoff_ms, report_ms;
    uint64_t retries, retries_unreported, outages;
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

const broker_hist_t *broker_store_commit_times(const broker_store_t *self)
{
    static const broker_hist_t s_none;
    return self ? &self->commit_times : &s_none;
}

uint64_t broker_store_commits(const broker_store_t *self)
{
    return self ? self->commits : 0;
}

double broker_store_commit_seconds(const broker_store_t *self)
{
    return self ? self->commit_times.sum : 0;
}

void broker_store_report_damage(const char *path, const char *what, const char *msg)
{
    LOG_ERROR("store %s is damaged (%s: %s); the broker does not run on a damaged store, "
              "so that nothing it holds is half-read or overwritten. To recover: stop "
              "everything using the folder and keep a copy of it (cp -a); rebuild the file "
              "with the sqlite3 shell: sqlite3 %s .recover | sqlite3 %s.recovered (a shell "
              "built without .recover says \"SQL logic error\"; then: sqlite3 %s .dump | sed "
              "'s/^ROLLBACK; -- due to errors$/COMMIT;/' | sqlite3 %s.recovered); check it with "
              "sqlite3 %s.recovered 'PRAGMA integrity_check' (it prints ok), and move it in "
              "place of %s, removing %s-wal and %s-shm. Rows lost with the damaged page are "
              "gone from the store: resuming a run submits its lost requests again",
              path, what, msg, path, path, path, path, path, path, path, path);
}


/* S_REQUEST's insert with STORE_REQUEST_ROWS rows of anonymous parameters,
 * as many per row as S_REQUEST has (prepared first), so the two cannot
 * disagree. */
static int s_prepare_requests_many(broker_store_t *self)
{
    const char *head = broker_store_sql[S_REQUEST];
    size_t n_head = (size_t)(strstr(head, " VALUES") - head);
    int cols = sqlite3_bind_parameter_count(self->stmt[S_REQUEST]);
    self->request_columns = cols;
    size_t cap = n_head + 8 + (size_t)STORE_REQUEST_ROWS * (2 * (size_t)cols + 2);
    char *sql = common_xmalloc(cap);
    size_t n = (size_t)snprintf(sql, cap, "%.*s VALUES", (int)n_head, head);
    for (int r = 0; r < STORE_REQUEST_ROWS; r++)
        for (int c = 0; c < cols; c++)
            n += (size_t)snprintf(sql + n, cap - n, "%s%s%s", c ? "" : r ? ",(" : "(",
                                  c ? ",?" : "?", c == cols - 1 ? ")" : "");
    int rc = sqlite3_prepare_v3(self->db, sql, -1, SQLITE_PREPARE_PERSISTENT,
                                &self->requests_many, NULL);
    if (rc != SQLITE_OK)
        LOG_ERROR("store %s: cannot prepare the insert of %d requests: %s", self->path,
                  STORE_REQUEST_ROWS, sqlite3_errmsg(self->db));
    free(sql);
    return rc == SQLITE_OK ? 0 : -1;
}

broker_store_t *broker_store_open(const char *dir, int scratch, int lock_wait_ms)
{
    broker_store_t *self = common_xcalloc(1, sizeof *self);
    self->lock_fd = -1;
    broker_store_log_init(&self->log);
    if (dir) {
        if (mkdir(dir, 0700) != 0 && errno != EEXIST) {
            LOG_ERROR("cannot create the store folder %s: %s", dir, strerror(errno));
            goto fail;
        }
        /* Two brokers on one store would each tell clients a different
         * story: the second one waits a little (a killed predecessor may
         * still be ending), then refuses to start (store_lock.h). */
        self->lock_fd = broker_store_lock(dir, STORE_FILE, lock_wait_ms);
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
    if (broker_store_exec(self->db, self->path,
                          scratch ? "PRAGMA journal_mode=MEMORY" : "PRAGMA journal_mode=WAL") != 0 ||
        broker_store_exec(self->db, self->path,
                          scratch ? "PRAGMA synchronous=OFF" : "PRAGMA synchronous=FULL") != 0 ||
        broker_store_exec(self->db, self->path, "PRAGMA cache_size=-" STORE_CACHE_KIB) != 0 ||
        broker_store_schema_apply(self->db, self->path) != 0)
        goto fail;
    for (int i = 0; i < S_COUNT_; i++) {
        if (sqlite3_prepare_v3(self->db, broker_store_sql[i], -1, SQLITE_PREPARE_PERSISTENT,
                               &self->stmt[i], NULL) != SQLITE_OK) {
            if (broker_store_is_damage(sqlite3_errcode(self->db)))
                broker_store_report_damage(self->path, "preparing a statement",
                                         sqlite3_errmsg(self->db));
            else
                LOG_ERROR("store %s: cannot prepare \"%s\": %s", self->path,
                          broker_store_sql[i], sqlite3_errmsg(self->db));
            goto fail;
        }
    }
    if (s_prepare_requests_many(self) != 0)
        goto fail;
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
    /* A failing store had its last try from the loop, which reported it. */
    if (self->db && self->stmt[S_COMMIT] && !self->fail_rc && self->log.n_ops > 0)
        (void)broker_store_commit(self);
    for (int i = 0; i < S_COUNT_; i++)
        sqlite3_finalize(self->stmt[i]);
    sqlite3_finalize(self->requests_many);
    if (self->db)
        sqlite3_close(self->db);
    /* After sqlite3_close: closing a descriptor of the database file would
     * drop SQLite's own POSIX locks on it. */
    broker_store_unlock(self->lock_fd); /* releases the flock and the file's lock */
    broker_store_log_fini(&self->log);
    free(self);
    *self_p = NULL;
}

/* ---- sticky failures ---------------------------------------------------- */

/* The primary cause in a user's words ("database or disk is full"). */
static const char *s_cause(const broker_store_t *self)
{
    return sqlite3_errstr(self->fail_rc & 0xff);
}

/* A write, BEGIN or COMMIT failed with rc. SQLite may already have rolled
 * the transaction back (a full disk, an I/O error) or left it open (busy):
 * ask it, and roll back what is left, so the store is known to hold exactly
 * what the last successful commit made. The log keeps everything since, for
 * a retry of the whole turn. */
static void s_fail(broker_store_t *self, int rc, const char *what)
{
    char msg[sizeof self->fail_msg];
    snprintf(msg, sizeof msg, "%s", sqlite3_errmsg(self->db));
    if (!sqlite3_get_autocommit(self->db) &&
        sqlite3_exec(self->db, "ROLLBACK", NULL, NULL, NULL) != SQLITE_OK)
        LOG_ERROR("store %s: ROLLBACK after a failed %s also failed: %s", self->path, what,
                  sqlite3_errmsg(self->db));
    int64_t now = common_clock_ms();
    int first = self->fail_rc == 0;
    self->n_pend = 0; /* still in the log: the retry writes them with the rest */
    self->fail_rc = rc;
    memcpy(self->fail_msg, msg, sizeof msg);
    if (first) {
        self->outages++;
        self->fail_since_ms = now;
        self->report_ms = now;
        self->retries_unreported = 0;
        self->backoff_ms = STORE_RETRY_FIRST_MS;
        LOG_ERROR("store %s cannot write (%s failed: %s); this turn is rolled back and nothing "
                  "it covered is sent; its writes and every later one are kept in memory and "
                  "written when the store can take them; no new work is dispatched or "
                  "accepted meanwhile",
                  self->path, what, msg);
    } else {
        self->retries_unreported++;
        self->backoff_ms = self->backoff_ms * 2 > STORE_RETRY_MAX_MS ? STORE_RETRY_MAX_MS
                                                                      : self->backoff_ms * 2;
        if (now - self->report_ms >= STORE_REPORT_MS) {
            LOG_ERROR("store %s still cannot write (%s) after %.1f s: %" PRIu64
                      " retries failed since the last line; %" PRIu64 " results and %" PRIu64
                      " requests waiting to be written; next retry in %" PRId64 " ms",
                      self->path, msg, (double)(now - self->fail_since_ms) / 1000.0,
                      self->retries_unreported, self->log_results, self->log_requests,
                      self->backoff_ms);
            self->report_ms = now;
            self->retries_unreported = 0;
        }
    }
    self->retry_at_ms = now + self->backoff_ms;
}

/* Opens the turn's transaction if none is. Returns 0, or -1 (failed). */
static int s_begin(broker_store_t *self, const char *sql_begin, sqlite3_stmt *st)
{
    if (!sqlite3_get_autocommit(self->db))
        return 0;
    broker_store_hook_txn(self->db);
    int rc;
    if (st) {
        rc = sqlite3_step(st);
        sqlite3_reset(st);
    } else {
        rc = sqlite3_exec(self->db, sql_begin, NULL, NULL, NULL);
        if (rc == SQLITE_OK)
            rc = SQLITE_DONE;
    }
    if (rc != SQLITE_DONE) {
        s_fail(self, rc, "BEGIN");
        return -1;
    }
    return 0;
}

/* Starts op `which` in the log; the caller fills its values and calls s_write. */
static size_t s_op(broker_store_t *self, int which)
{
    if (which != S_ACK_MARK && which != S_ACK_ROWS) {
        if (self->log_must++ == 0)
            self->must_since_us = common_clock_us();
    }
    else if (self->lazy_since_ms == 0)
        self->lazy_since_ms = common_clock_ms();
    if (which == S_HISTORY || which == S_RESULT)
        self->log_results++;
    else if (which == S_REQUEST)
        self->log_requests++;
    return broker_store_log_begin(&self->log, which);
}

/* Writes the new requests waiting in the log (STORE_REQUEST_ROWS). */
static void s_flush_requests(broker_store_t *self)
{
    size_t n = self->n_pend;
    self->n_pend = 0;
    if (n == 0 || self->fail_rc)
        return;
    int rc = SQLITE_DONE;
    if (n == STORE_REQUEST_ROWS) {
        sqlite3_stmt *st = self->requests_many;
        for (size_t r = 0; r < n; r++)
            broker_store_log_bind(&self->log, self->pend[r], st, (int)r * self->request_columns,
                                  self->request_columns);
        rc = sqlite3_step(st);
        sqlite3_reset(st);
        sqlite3_clear_bindings(st);
    } else {
        for (size_t r = 0; r < n && rc == SQLITE_DONE; r++)
            rc = broker_store_log_apply(&self->log, self->pend[r], self->stmt[S_REQUEST]);
    }
    if (rc != SQLITE_DONE)
        s_fail(self, rc, "write");
}

void broker_store_flush(broker_store_t *self)
{
    if (self)
        s_flush_requests(self);
}

/* Writes op i inside the turn's transaction, opening it if needed. While
 * the store is failing it is only kept: the retry writes it with the rest.
 * A new request waits for a full statement of them; a new evaluation may
 * pass them (nothing it writes reads requests); anything else writes them
 * first. */
static void s_write(broker_store_t *self, size_t i)
{
    if (self->fail_rc || s_begin(self, NULL, self->stmt[S_BEGIN]) != 0)
        return;
    int which = self->log.ops[i].which;
    if (which == S_REQUEST) {
        self->pend[self->n_pend++] = i;
        if (self->n_pend == STORE_REQUEST_ROWS)
            s_flush_requests(self);
        return;
    }
    if (which != S_EVAL) {
        s_flush_requests(self);
        if (self->fail_rc)
            return;
    }
    int rc = broker_store_log_apply(&self->log, i, self->stmt[which]);
    if (rc != SQLITE_DONE && rc != SQLITE_ROW)
        s_fail(self, rc, "write");
}

static void s_int(broker_store_t *self, size_t i, int k, int64_t v)
{
    broker_store_log_int(&self->log, i, k, v);
}

static void s_u64(broker_store_t *self, size_t i, int k, uint64_t v)
{
    broker_store_log_int(&self->log, i, k, (int64_t)v); /* two's-complement cast, see top */
}

static void s_real(broker_store_t *self, size_t i, int k, double v)
{
    broker_store_log_real(&self->log, i, k, v);
}

static void s_text(broker_store_t *self, size_t i, int k, const char *v)
{
    broker_store_log_text(&self->log, i, k, v);
}

static void s_blob(broker_store_t *self, size_t i, int k, const void *p, size_t n)
{
    broker_store_log_blob(&self->log, i, k, p, n);
}

static void s_bind_u64(sqlite3_stmt *st, int i, uint64_t v)
{
    sqlite3_bind_int64(st, i, (sqlite3_int64)v); /* two's-complement cast, see top */
}

void broker_store_note_run(broker_store_t *self, const broker_run_t *run)
{
    size_t i = s_op(self, S_RUN);
    s_text(self, i, 1, run->id);
    s_u64(self, i, 2, run->seed);
    s_int(self, i, 3, run->seed_mode);
    s_real(self, i, 4, s_now());
    s_text(self, i, 5, run->owner[0] ? run->owner : NULL);
    s_write(self, i);
}

void broker_store_note_eval(broker_store_t *self, const broker_eval_t *e)
{
    size_t i = s_op(self, S_EVAL);
    s_blob(self, i, 1, e->key, PROTO_KEY_BYTES);
    s_text(self, i, 2, e->plugin->name);
    s_text(self, i, 3, e->plugin->version);
    s_text(self, i, 4, e->params);
    s_blob(self, i, 5, e->live->genome, e->live->genome_len);
    s_u64(self, i, 6, e->seed);
    s_int(self, i, 7, e->live->timeout_ms);
    s_int(self, i, 8, e->live->max_attempts);
    s_real(self, i, 9, s_now());
    s_write(self, i);
}

void broker_store_note_request(broker_store_t *self, const broker_run_t *run, uint64_t tag,
                               uint64_t batch_tag, uint32_t replicate, const broker_eval_t *e,
                               int cached)
{
    size_t i = s_op(self, S_REQUEST);
    s_text(self, i, 1, run->id);
    s_u64(self, i, 2, tag);
    s_u64(self, i, 3, batch_tag);
    s_int(self, i, 4, replicate);
    s_blob(self, i, 5, e->key, PROTO_KEY_BYTES);
    s_int(self, i, 6, cached != 0);
    s_real(self, i, 7, s_now());
    s_int(self, i, 8, e->fresh != 0);
    s_write(self, i);
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
    s_flush_requests(self);
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

uint64_t broker_store_request_tags_end(broker_store_t *self, const char *run_id)
{
    s_flush_requests(self);
    sqlite3_stmt *st = self->stmt[S_TAG_END];
    sqlite3_bind_text(st, 1, run_id, -1, SQLITE_STATIC);
    /* Tags are written as int64 bit patterns (s_bind_u64): a tag past
     * INT64_MAX reads negative (the smallest), and then no bound is given. */
    uint64_t end = UINT64_MAX;
    if (sqlite3_step(st) == SQLITE_ROW) {
        if (sqlite3_column_type(st, 0) == SQLITE_NULL)
            end = 0;
        else if (sqlite3_column_int64(st, 1) >= 0)
            end = (uint64_t)sqlite3_column_int64(st, 0) + 1;
    }
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return end;
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
    /* A first evaluation is the cache row, with the run that paid for it; a
     * re-evaluation (no-cache, or a retried crash or time-out) leaves that
     * row as it was and is appended to the results history. Writing the
     * first one to the history too (schema 1) cost two b-tree inserts and
     * about 250 bytes per evaluation for a copy of the cache row. */
    s_bind_result(self, e->fresh ? S_HISTORY : S_RESULT, e, o, worker, host, arch);
}

static void s_bind_result(broker_store_t *self, int which, const broker_eval_t *e,
                          const proto_outcome_t *o, const char *worker, const char *host,
                          const char *arch)
{
    size_t i = s_op(self, which);
    s_blob(self, i, 1, e->key, PROTO_KEY_BYTES);
    s_int(self, i, 2, e->status);
    s_text(self, i, 3, proto_status_name(e->status));
    if (e->n_fitness) {
        /* Little-endian IEEE 754 doubles, whatever the host. */
        uint8_t le[PROTO_MAX_OBJECTIVES * 8];
        uint32_t nf = e->n_fitness < PROTO_MAX_OBJECTIVES ? e->n_fitness : PROTO_MAX_OBJECTIVES;
        for (uint32_t f = 0; f < nf; f++) {
            uint64_t bits;
            memcpy(&bits, &broker_eval_fitness(e)[f], 8);
            for (int k = 0; k < 8; k++)
                le[f * 8 + (uint32_t)k] = (uint8_t)(bits >> (8 * k));
        }
        s_blob(self, i, 4, le, (size_t)nf * 8);
        char *json = s_fitness_json(broker_eval_fitness(e), nf);
        s_text(self, i, 5, json);
        free(json);
    }
    s_text(self, i, 6, e->error ? e->error : "");
    /* attempts counts dispatches that did not end with this result: crashed
     * or timed out (the final one counts too when it ended the same way),
     * or lost with a worker that vanished. */
    s_int(self, i, 7, (int)e->live->attempts + (int)e->live->lost);
    if (worker) {
        s_text(self, i, 8, worker);
        s_text(self, i, 9, host);
        s_text(self, i, 10, arch);
    }
    /* Only workers with the plugin's pinned build get its jobs (catalog.h),
     * so the pinned digest is the build that computed this result. */
    if (worker && e->plugin->n_digests > 0)
        s_blob(self, i, 11, e->plugin->digests[0], PROTO_DIGEST_BYTES);
    if (o) {
        s_real(self, i, 12, o->cpu_seconds);
        s_u64(self, i, 13, o->peak_rss_kb);
    }
    s_real(self, i, 14, e->finished_at > 0 ? e->finished_at : s_now());
    s_text(self, i, 15, e->live->home ? e->live->home->id : "");
    if (which == S_HISTORY)
        s_int(self, i, 16, e->fresh != 0);
    s_write(self, i);
}

void broker_store_note_ack(broker_store_t *self, const broker_run_t *run, uint64_t first,
                           uint64_t last)
{
    /* Two statements for a generation's acknowledgements, which come as one
     * range of tags, rather than one per tag (S_ACK_MARK says how). */
    size_t i = s_op(self, S_ACK_MARK);
    s_text(self, i, 1, run->id);
    s_u64(self, i, 2, first);
    s_u64(self, i, 3, last);
    s_write(self, i);
    i = s_op(self, S_ACK_ROWS);
    s_text(self, i, 1, run->id);
    s_u64(self, i, 2, first);
    s_u64(self, i, 3, last);
    s_write(self, i);
}

/* Request tag of run is to be owed: the run's mark comes down to it. */
static void s_lower_mark(broker_store_t *self, const broker_run_t *run, uint64_t tag)
{
    size_t i = s_op(self, S_LOWER_ROWS);
    s_text(self, i, 1, run->id);
    s_u64(self, i, 2, tag);
    s_write(self, i);
    i = s_op(self, S_LOWER_MARK);
    s_text(self, i, 1, run->id);
    s_u64(self, i, 2, tag);
    s_write(self, i);
}

void broker_store_note_request_below(broker_store_t *self, const broker_run_t *run,
                                     uint64_t tag)
{
    s_lower_mark(self, run, tag);
}

void broker_store_note_request_fresh(broker_store_t *self, const broker_run_t *run, uint64_t tag)
{
    s_lower_mark(self, run, tag);
    size_t i = s_op(self, S_REFRESH);
    s_text(self, i, 1, run->id);
    s_u64(self, i, 2, tag);
    s_write(self, i);
}

void broker_store_note_unack(broker_store_t *self, const broker_run_t *run, uint64_t tag)
{
    s_lower_mark(self, run, tag);
    size_t i = s_op(self, S_UNACK);
    s_text(self, i, 1, run->id);
    s_u64(self, i, 2, tag);
    s_write(self, i);
}

void broker_store_note_plugin(broker_store_t *self, const broker_plugin_t *p)
{
    size_t i = s_op(self, S_PLUGIN);
    s_text(self, i, 1, p->name);
    s_text(self, i, 2, p->version);
    s_int(self, i, 3, p->objectives);
    s_int(self, i, 4, p->flags);
    s_blob(self, i, 5, p->digests, (size_t)p->n_digests * PROTO_DIGEST_BYTES);
    s_real(self, i, 6, s_now());
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
    s_text(self, i, 7, seeds); /* NULL stays NULL */
    free(seeds);
    /* param defaults: the text, "" for none, NULL while not known */
    s_text(self, i, 8,
           p->param_defaults_known ? (p->param_defaults ? p->param_defaults : "") : NULL);
    s_write(self, i);
}

/* The whole log again in one transaction, after a failure. Returns 0 when it
 * committed. */
static int s_retry(broker_store_t *self)
{
    self->retries++;
    if (s_begin(self, "BEGIN IMMEDIATE", NULL) != 0)
        return -1;
    for (size_t i = 0; i < self->log.n_ops; i++) {
        int which = self->log.ops[i].which;
        int rc = broker_store_log_apply(&self->log, i, self->stmt[which]);
        if (rc != SQLITE_DONE && rc != SQLITE_ROW) {
            s_fail(self, rc, "write");
            return -1;
        }
    }
    sqlite3_stmt *st = self->stmt[S_COMMIT];
    int rc = sqlite3_step(st);
    sqlite3_reset(st);
    if (rc != SQLITE_DONE) {
        s_fail(self, rc, "COMMIT");
        return -1;
    }
    LOG_INFO("store %s writable again after %.1f s (%" PRIu64 " retries): wrote %" PRIu64
             " results and %" PRIu64 " requests kept meanwhile; dispatching and accepting again",
             self->path, (double)(common_clock_ms() - self->fail_since_ms) / 1000.0,
             self->retries, self->log_results, self->log_requests);
    self->fail_rc = 0;
    self->fail_msg[0] = '\0';
    self->retries = 0;
    return 0;
}

int broker_store_commit(broker_store_t *self)
{
    s_flush_requests(self);
    if (self->fail_rc) {
        if (common_clock_ms() < self->retry_at_ms || s_retry(self) != 0)
            return -1;
    } else if (sqlite3_get_autocommit(self->db)) {
        return 0; /* nothing written this turn */
    } else {
        sqlite3_stmt *st = self->stmt[S_COMMIT];
        int64_t t0 = common_clock_us();
        int rc = sqlite3_step(st);
        sqlite3_reset(st);
        if (rc != SQLITE_DONE) {
            s_fail(self, rc, "COMMIT");
            return -1;
        }
        broker_hist_observe(&self->commit_times, (double)(common_clock_us() - t0) / 1e6);
    }
    self->commits++;
    broker_store_log_clear(&self->log);
    self->log_results = self->log_requests = self->log_must = 0;
    self->lazy_since_ms = 0;
    return 0;
}

int64_t broker_store_waiting_us(const broker_store_t *self, int64_t now_us)
{
    if (!self || self->log_must == 0)
        return -1;
    return now_us > self->must_since_us ? now_us - self->must_since_us : 0;
}

long broker_store_commit_due_in_ms(const broker_store_t *self, int64_t now_ms)
{
    if (!self || self->fail_rc || self->log_must > 0)
        return 0; /* a failing store keeps its own retry pacing (commit) */
    if (self->lazy_since_ms == 0)
        return -1;
    int64_t left = self->lazy_since_ms + BROKER_STORE_LAZY_MS - now_ms;
    return left > 0 ? (long)left : 0;
}

int broker_store_failing(const broker_store_t *self)
{
    return self && self->fail_rc != 0;
}

long broker_store_retry_in_ms(const broker_store_t *self)
{
    if (!broker_store_failing(self))
        return -1;
    int64_t left = self->retry_at_ms - common_clock_ms();
    return left > 0 ? (long)left : 0;
}

void broker_store_retry_now(broker_store_t *self)
{
    if (self)
        self->retry_at_ms = 0;
}

uint64_t broker_store_unwritten(const broker_store_t *self)
{
    return self ? self->log_results : 0;
}

void broker_store_describe(const broker_store_t *self, char *buf, size_t len)
{
    if (!broker_store_failing(self)) {
        snprintf(buf, len, "store %s: writable", self ? self->path : "(none)");
        return;
    }
    snprintf(buf, len,
             "store cannot write: %s at %s; %" PRIu64 " results waiting to be written "
             "(failing for %.0f s; SQLite said: %s)",
             s_cause(self), self->path, self->log_results,
             (double)(common_clock_ms() - self->fail_since_ms) / 1000.0, self->fail_msg);
}

const char *broker_store_path(const broker_store_t *self)
{
    return self->path;
}
