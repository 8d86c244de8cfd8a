/* store_check.c: the store's integrity check on a thread of its own (see
 * store_check.h). Owns the thread, its read-only connection and the pipe
 * that tells the broker's poll the verdict is in. */
#include "store_check.h"

#include <errno.h>
#include <fcntl.h>
#include <pthread.h>
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "common/clock.h"
#include "common/log.h"
#include "common/alloc.h"
#include "store.h"

typedef enum { S_SOUND, S_DAMAGED, S_INTERRUPTED, S_FAILED } s_verdict_t;

struct broker_store_check {
    char *path;
    pthread_t thread;
    int pipe[2];          /* the thread writes one byte to [1] when done */
    pthread_mutex_t lock; /* guards db and stopping */
    sqlite3 *db;          /* while the check runs on it: finish interrupts it */
    int stopping;         /* finish was called: a check not yet begun is not */
    /* Written by the thread before its byte, read after the join. */
    s_verdict_t verdict;
    char why[512];
    int64_t took_ms;
};

/* PRAGMA quick_check(5): every b-tree page and record header of the file
 * read once (not the index-to-table cross-checks of integrity_check). */
static s_verdict_t s_quick_check(sqlite3 *db, char *why, size_t len)
{
    sqlite3_stmt *st = NULL;
    int rc = sqlite3_prepare_v2(db, "PRAGMA quick_check(5)", -1, &st, NULL);
    int rows = 0, ok = 0;
    if (rc == SQLITE_OK)
        rc = SQLITE_ROW;
    while (rc == SQLITE_ROW && (rc = sqlite3_step(st)) == SQLITE_ROW) {
        const char *line = (const char *)sqlite3_column_text(st, 0);
        if (rows++ == 0) {
            snprintf(why, len, "%s", line ? line : "");
            ok = line && strcmp(line, "ok") == 0;
        }
    }
    int code = rc;
    if (rc != SQLITE_DONE)
        snprintf(why, len, "%s", sqlite3_errmsg(db));
    sqlite3_finalize(st);
    if (code == SQLITE_INTERRUPT)
        return S_INTERRUPTED;
    if (code != SQLITE_DONE && code != SQLITE_CORRUPT && code != SQLITE_NOTADB)
        return S_FAILED; /* I/O, memory, a lock: not a verdict on the file */
    return ok ? S_SOUND : S_DAMAGED;
}

static void *s_run(void *arg)
{
    broker_store_check_t *self = arg;
    int64_t t0 = common_clock_ms();
    sqlite3 *db = NULL;
    if (sqlite3_open_v2(self->path, &db, SQLITE_OPEN_READONLY | SQLITE_OPEN_NOMUTEX, NULL) !=
        SQLITE_OK) {
        snprintf(self->why, sizeof self->why, "%s", db ? sqlite3_errmsg(db) : "out of memory");
        self->verdict = S_FAILED;
    } else {
        sqlite3_busy_timeout(db, 2000); /* the broker's commit, at most */
        pthread_mutex_lock(&self->lock);
        int stopped = self->stopping;
        if (!stopped)
            self->db = db;
        pthread_mutex_unlock(&self->lock);
        self->verdict = stopped ? S_INTERRUPTED : s_quick_check(db, self->why, sizeof self->why);
        pthread_mutex_lock(&self->lock);
        self->db = NULL;
        pthread_mutex_unlock(&self->lock);
    }
    sqlite3_close(db);
    self->took_ms = common_clock_ms() - t0;
    char byte = 1;
    ssize_t n;
    do
        n = write(self->pipe[1], &byte, 1);
    while (n < 0 && errno == EINTR);
    return NULL;
}

broker_store_check_t *broker_store_check_start(const char *path)
{
    broker_store_check_t *self = common_xcalloc(1, sizeof *self);
    self->path = common_xstrdup(path);
    self->pipe[0] = self->pipe[1] = -1;
    pthread_mutex_init(&self->lock, NULL);
    int err = pipe2(self->pipe, O_CLOEXEC) != 0 ? errno : 0;
    if (!err)
        err = pthread_create(&self->thread, NULL, s_run, self);
    if (err) {
        LOG_WARN("store %s: cannot start its integrity check (%s); the broker runs on it "
                 "unchecked beyond what the start read",
                 path, strerror(err));
        for (int i = 0; i < 2; i++)
            if (self->pipe[i] >= 0)
                close(self->pipe[i]);
        pthread_mutex_destroy(&self->lock);
        free(self->path);
        free(self);
        return NULL;
    }
    return self;
}

int broker_store_check_fd(const broker_store_check_t *self)
{
    return self->pipe[0];
}

int broker_store_check_finish(broker_store_check_t **pself)
{
    broker_store_check_t *self = pself ? *pself : NULL;
    if (!self)
        return 0;
    *pself = NULL;
    pthread_mutex_lock(&self->lock);
    self->stopping = 1;
    if (self->db)
        sqlite3_interrupt(self->db);
    pthread_mutex_unlock(&self->lock);
    pthread_join(self->thread, NULL);
    int damaged = 0;
    switch (self->verdict) {
    case S_SOUND:
        LOG_INFO("store %s checked (PRAGMA quick_check: ok) in %.1f s, while serving",
                 self->path, (double)self->took_ms / 1000.0);
        break;
    case S_DAMAGED:
        broker_store_report_damage(self->path, "PRAGMA quick_check", self->why);
        damaged = 1;
        break;
    case S_INTERRUPTED:
        LOG_INFO("store %s: its integrity check was stopped after %.1f s (the broker is "
                 "stopping); the next start checks it again",
                 self->path, (double)self->took_ms / 1000.0);
        break;
    case S_FAILED:
        LOG_WARN("store %s: its integrity check could not run (%s); the broker runs on it "
                 "unchecked beyond what the start read",
                 self->path, self->why);
        break;
    }
    close(self->pipe[0]);
    close(self->pipe[1]);
    pthread_mutex_destroy(&self->lock);
    free(self->path);
    free(self);
    return damaged;
}
