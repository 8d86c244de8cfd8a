/* store_log.h: the store's writes since its last successful commit, kept as
 * copies (statement and bound values) so that a turn whose transaction failed
 * can be written again, whole, on a later turn. SQLite may roll a failed
 * transaction back by itself (a full disk, an I/O error): what the broker
 * already told its own memory must then be written again from somewhere, and
 * the evaluations it came from may have left the RAM cache meanwhile, hence
 * copies. The log is cleared at each successful commit, so in a healthy
 * broker it holds one turn; while the store cannot write it holds what came
 * in since (results of jobs already running, acknowledgements), which is
 * bounded because no new work is accepted or dispatched then (store.h).
 *
 * Values live in one byte arena per log (no allocation per value). Not here:
 * which statements exist (store_sql.c) and what they mean (store.c), when to retry. */
#ifndef BROKER_STORE_LOG_H
#define BROKER_STORE_LOG_H

#include <stddef.h>
#include <stdint.h>

struct sqlite3_stmt;

#define BROKER_STORE_MAX_PARAMS 16 /* the widest statement (results history) binds 16 */

typedef struct {
    uint8_t type; /* 0 = NULL (unset), else SQLITE_INTEGER / _FLOAT / _TEXT / _BLOB */
    uint32_t len; /* text and blob bytes */
    union {
        int64_t i;
        double d;
        size_t off; /* text and blob: offset in the arena */
    } u;
} broker_store_val_t;

typedef struct {
    int which;                                     /* the statement, store.c's index */
    broker_store_val_t v[BROKER_STORE_MAX_PARAMS]; /* v[k] is parameter ?k+1 */
} broker_store_op_t;

typedef struct {
    broker_store_op_t *ops;
    size_t n_ops, cap_ops;
    uint8_t *bytes;
    size_t n_bytes, cap_bytes;
} broker_store_log_t;

void broker_store_log_init(broker_store_log_t *self);
void broker_store_log_fini(broker_store_log_t *self);
/* Forgets every op (after a commit). Keeps a modest capacity for the next
 * turn and gives back what a long outage grew. */
void broker_store_log_clear(broker_store_log_t *self);

/* Appends an op for statement which with every parameter NULL; the setters
 * below fill it. Returns its index (ops move when the log grows). */
size_t broker_store_log_begin(broker_store_log_t *self, int which);
/* Parameter k (1-based, as in "?k") of op i. Text NULL stays NULL; a blob is
 * copied, zero bytes giving an empty blob (never NULL). */
void broker_store_log_int(broker_store_log_t *self, size_t i, int k, int64_t v);
void broker_store_log_real(broker_store_log_t *self, size_t i, int k, double v);
void broker_store_log_text(broker_store_log_t *self, size_t i, int k, const char *s);
void broker_store_log_blob(broker_store_log_t *self, size_t i, int k, const void *p, size_t n);

/* Binds op i's parameters ?1..?n to st's parameters base+1..base+n (one row
 * of a statement that writes many). */
void broker_store_log_bind(const broker_store_log_t *self, size_t i, struct sqlite3_stmt *st,
                           int base, int n);
/* Binds op i to st (prepared for op i's statement), steps it once, resets
 * it and clears its bindings. Returns SQLite's result code of the step
 * (SQLITE_DONE or SQLITE_ROW on success). */
int broker_store_log_apply(const broker_store_log_t *self, size_t i, struct sqlite3_stmt *st);

#endif
