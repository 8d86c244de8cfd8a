/* store_faults.c: the broker's store seam (broker/store_hook.h) for
 * fitfarm-broker-faults, a build of the broker used only by the integration
 * tests, never installed. It makes SQLite itself fail writes with
 * SQLITE_FULL, deterministically and without root, through SQLite's own
 * PRAGMA max_page_count: a write that needs a page past the limit fails as on
 * a full disk (sqlite.org/pragma.html#pragma_max_page_count).
 *
 * Before each write transaction the broker calls broker_store_hook_txn; this
 * version reads the file named by FITFARM_TEST_STORE_PAGES (if set) and,
 * when its content changed since the last call, applies it:
 *   "+N"  the limit is the database's current page count plus N;
 *   "N"   the limit is N pages (SQLite never sets it below the current size);
 *   "off" (or an empty or missing file) no limit: space came back.
 * A test writes the file to make the disk "full" and again to give the
 * space back, while the broker runs. */
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store_hook.h"

static char s_applied[64] = "off";

void broker_store_hook_txn(struct sqlite3 *db)
{
    const char *path = getenv("FITFARM_TEST_STORE_PAGES");
    if (!path || !*path)
        return;
    char text[64] = "off";
    FILE *f = fopen(path, "r");
    if (f) {
        size_t n = fread(text, 1, sizeof text - 1, f);
        text[n] = '\0';
        fclose(f);
        text[strcspn(text, "\r\n")] = '\0';
        if (!text[0])
            snprintf(text, sizeof text, "off");
    }
    if (strcmp(text, s_applied) == 0)
        return;
    long long limit = 2147483646LL; /* SQLite's ceiling: no limit in practice */
    if (text[0] == '+') {
        sqlite3_stmt *st = NULL;
        long long pages = 0;
        if (sqlite3_prepare_v2(db, "PRAGMA page_count", -1, &st, NULL) == SQLITE_OK &&
            sqlite3_step(st) == SQLITE_ROW)
            pages = sqlite3_column_int64(st, 0);
        sqlite3_finalize(st);
        limit = pages + atoll(text + 1);
    } else if (strcmp(text, "off") != 0) {
        limit = atoll(text);
    }
    char sql[96];
    snprintf(sql, sizeof sql, "PRAGMA max_page_count=%lld", limit);
    if (sqlite3_exec(db, sql, NULL, NULL, NULL) == SQLITE_OK)
        fprintf(stderr, "store_faults: %s (FITFARM_TEST_STORE_PAGES says \"%s\")\n", sql, text);
    snprintf(s_applied, sizeof s_applied, "%s", text);
}
