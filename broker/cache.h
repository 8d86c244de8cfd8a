/* cache.h: the evaluation table as a bounded cache over the store. A key not
 * in RAM may still have a finished result in the store (evicted, or from
 * before a restart, which loads no results): it is read back here, by the
 * evaluations primary key, before anyone decides it must be evaluated. Also
 * the memory log line. Not here: the LRU list itself (evals.c), what a hit
 * means for a request (client_io.c). */
#ifndef BROKER_CACHE_H
#define BROKER_CACHE_H

#include <sqlite3.h>
#include <stdint.h>

#include "core.h"

/* The evaluation of key: in RAM (a DONE one moves to the front of the LRU
 * list), else its finished result read from the store into the cache, else
 * NULL (never seen, or its plugin is not in the catalog). Borrowed: valid
 * until the next call that may evict (another lookup, a result), so use it
 * at once. */
broker_eval_t *broker_cache_lookup(broker_t *b, const uint8_t key[PROTO_KEY_BYTES]);
/* The provenance stored in five columns of a row, from col on: worker,
 * host, cpu_seconds, peak_rss_kb, finished_at (NULL reads as ""/0); the
 * strings interned. The columns are named in this order by every query that
 * answers from the store. */
#define BROKER_CACHE_PROVENANCE_COLUMNS "worker, host, cpu_seconds, peak_rss_kb, finished_at"
void broker_cache_row_provenance(broker_t *b, sqlite3_stmt *st, int col,
                                 broker_provenance_t *out);
/* Frees the prepared statement; before the store closes. */
void broker_cache_fini(broker_t *b);
/* One INFO line: evaluations and results in RAM against their caps, peaks,
 * store reads, results owed from the store. */
void broker_cache_log(broker_t *b);

#endif
