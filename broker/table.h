/* table.h: a generic open-addressing hash map keyed by bytes.
 *
 * Every key lives inside its value (an evaluation's content key, a worker's
 * routing id, a run's id), so a slot holds only the value pointer and the
 * key's hash, 16 bytes: the table finds a value's key through the function
 * it was made with, and owns neither keys nor values. A value's key bytes
 * must stay valid and unchanged while the entry exists. The result cache
 * holds a slot per finished evaluation in RAM, millions in a long search,
 * which is why the slot is no larger. Linear probing with backward-shift
 * deletion, so there are no tombstones and lookups stay short under churn.
 * Not here: ordering, iteration stability across inserts. */
#ifndef BROKER_TABLE_H
#define BROKER_TABLE_H

#include <stddef.h>
#include <stdint.h>

typedef struct broker_table broker_table_t;

/* The key of value: its bytes, and their count in *key_len. */
typedef const void *(*broker_table_key_fn)(const void *value, size_t *key_len);

/* New empty table whose values' keys key_of finds; caller destroys it.
 * Aborts on out of memory. */
broker_table_t *broker_table_new(broker_table_key_fn key_of);
/* Frees the table (not the keys or values); sets *self_p NULL; accepts NULL. */
void broker_table_destroy(broker_table_t **self_p);

/* The value stored under key, or NULL. */
void *broker_table_get(const broker_table_t *self, const void *key, size_t key_len);
/* Inserts or replaces. key must be value's own key (key_of(value), which
 * the table reads again on later lookups); value must not be NULL.
 * Returns the previous value under key, or NULL. */
void *broker_table_put(broker_table_t *self, const void *key, size_t key_len, void *value);
/* Removes key; returns its value, or NULL if absent. */
void *broker_table_delete(broker_table_t *self, const void *key, size_t key_len);
size_t broker_table_size(const broker_table_t *self);

/* Iteration: start with *cursor = 0; returns the next value or NULL at the
 * end. The table must not change during an iteration. */
void *broker_table_next(const broker_table_t *self, size_t *cursor);

/* 64-bit FNV-1a followed by a finaliser; exposed for tests. */
uint64_t broker_table_hash(const void *key, size_t key_len);

/* Internal consistency (every entry reachable from its home slot). */
int broker_table_check(const broker_table_t *self);

#endif
