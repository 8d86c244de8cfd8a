/* store_schema.h: the store's tables and how a file made by an older
 * broker is brought up to the current schema. Internal to the store
 * (store.c opens the connection, sets WAL and synchronous, then calls
 * these).
 * Schema versions (meta.schema_version) below. */
#ifndef BROKER_STORE_SCHEMA_H
#define BROKER_STORE_SCHEMA_H

#include <sqlite3.h>

/* 1: the first layout.
 * 2: the results history holds re-evaluations only; a first evaluation's
 * run is evaluations.run_id (s_migrate_history moves schema 1 stores).
 * 3: plugins has one row per name and version, with first_seen (which
 * version a plugin given without one means, catalog.h); s_migrate_versions
 * moves schema 2 stores.
 * 4: each run records the tag below which its requests are acknowledged
 * (runs.acked_below), and the partial index requests_unacked is gone;
 * s_migrate_acked moves schema 3 stores. A broker refuses a store whose
 * schema is newer than its own. */
#define STORE_SCHEMA_VERSION 4

/* SQLite's word for a file that is not a sound database (CORRUPT, NOTADB). */
int broker_store_is_damage(int rc);
/* Runs sql; on failure logs it (a damaged file as such) and returns -1. */
int broker_store_exec(sqlite3 *db, const char *path, const char *sql);
/* Creates what is missing, records the schema version, adds the columns
 * older stores lack and moves schema 1, 2 and 3 stores to 4 (each move one
 * transaction: a failure leaves the file as it was). 0, or -1 (logged). */
int broker_store_schema_apply(sqlite3 *db, const char *path);

#endif
