/* cli_store.h: read-only access to a broker's durable store (DIR/fitfarm.db,
 * schema in README "The store") for `fitfarm runs`, `export` and `verify`.
 * SQLite in WAL mode lets this reader work while the broker writes. Owns the
 * open connection only; what the rows mean is the commands' business. */
#ifndef CLIENT_CLI_STORE_H
#define CLIENT_CLI_STORE_H

#include <sqlite3.h>
#include <stdint.h>
#include <stdio.h>

/* The broker daemon's default --store, so commands run beside it need no flag. */
#define CLI_DEFAULT_STORE "fitfarm-store"

/* Opens DIR/fitfarm.db read-only. Returns the handle (caller closes it with
 * sqlite3_close), or NULL after printing why, prefixed with prog. */
sqlite3 *cli_store_open(const char *dir, const char *prog);

/* Prepares sql or prints why (prefixed with prog) and returns NULL. */
sqlite3_stmt *cli_store_prepare(sqlite3 *db, const char *sql, const char *prog);

/* A u64 stored by the broker's two's-complement cast, back to unsigned. */
uint64_t cli_store_u64(sqlite3_stmt *st, int col);

/* Writes a REAL unix time as "2026-01-31T12:34:56.789Z" into out (32 bytes);
 * "" for NULL. */
void cli_store_time(sqlite3_stmt *st, int col, char out[32]);

/* Lower-case hex of a BLOB column into out (2n+1 bytes, n <= max); "" for NULL. */
void cli_store_hex(sqlite3_stmt *st, int col, char *out, size_t max);

/* Number of little-endian doubles in a BLOB column (at most max), decoded into v. */
size_t cli_store_doubles(sqlite3_stmt *st, int col, double *v, size_t max);

/* Writes a genome BLOB as a JSON array of doubles when its length is a
 * multiple of 8, else as a JSON string of hex. */
void cli_store_genome_json(FILE *f, sqlite3_stmt *st, int col);

#endif
