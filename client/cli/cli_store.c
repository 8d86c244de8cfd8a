/* cli_store.c: read-only store access for the CLI (see cli_store.h). */
#include "cli_store.h"

#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>

#include "key.h"
#include "params.h"

sqlite3 *cli_store_open(const char *dir, const char *prog)
{
    char path[4096];
    struct stat sb;
    snprintf(path, sizeof path, "%s/fitfarm.db", dir);
    if (stat(path, &sb) != 0) {
        fprintf(stderr, "%s: no store at %s (give --store the folder a broker or `fitfarm eval "
                "--store` kept its store in)\n", prog, path);
        return NULL;
    }
    sqlite3 *db = NULL;
    if (sqlite3_open_v2(path, &db, SQLITE_OPEN_READONLY, NULL) != SQLITE_OK) {
        fprintf(stderr, "%s: cannot open %s: %s\n", prog, path,
                db ? sqlite3_errmsg(db) : "out of memory");
        sqlite3_close(db);
        return NULL;
    }
    sqlite3_busy_timeout(db, 5000); /* the broker commits at most one turn at a time */
    return db;
}

sqlite3_stmt *cli_store_prepare(sqlite3 *db, const char *sql, const char *prog)
{
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(db, sql, -1, &st, NULL) != SQLITE_OK) {
        fprintf(stderr, "%s: cannot read the store: %s (is it a fitfarm store of this "
                "version?)\n", prog, sqlite3_errmsg(db));
        return NULL;
    }
    return st;
}

uint64_t cli_store_u64(sqlite3_stmt *st, int col)
{
    return (uint64_t)sqlite3_column_int64(st, col);
}

void cli_store_time(sqlite3_stmt *st, int col, char out[32])
{
    out[0] = '\0';
    if (sqlite3_column_type(st, col) == SQLITE_NULL)
        return;
    double t = sqlite3_column_double(st, col);
    time_t sec = (time_t)t;
    struct tm tm;
    if (!gmtime_r(&sec, &tm))
        return;
    int ms = (int)((t - (double)sec) * 1000.0);
    if (ms < 0 || ms > 999)
        ms = 0;
    char day[16];
    strftime(day, sizeof day, "%Y-%m-%d", &tm);
    snprintf(out, 32, "%.10sT%02d:%02d:%02d.%03dZ", day, tm.tm_hour % 100, tm.tm_min % 100,
             tm.tm_sec % 100, ms % 1000);
}

void cli_store_hex(sqlite3_stmt *st, int col, char *out, size_t max)
{
    out[0] = '\0';
    const void *b = sqlite3_column_blob(st, col);
    size_t n = (size_t)sqlite3_column_bytes(st, col);
    if (!b)
        return;
    if (n > max)
        n = max;
    proto_hex(b, n, out);
}

size_t cli_store_doubles(sqlite3_stmt *st, int col, double *v, size_t max)
{
    const uint8_t *le = sqlite3_column_blob(st, col);
    size_t n = (size_t)sqlite3_column_bytes(st, col) / 8;
    if (!le)
        return 0;
    if (n > max)
        n = max;
    for (size_t i = 0; i < n; i++) {
        uint64_t bits = 0;
        for (int k = 0; k < 8; k++)
            bits |= (uint64_t)le[i * 8 + (size_t)k] << (8 * k);
        memcpy(&v[i], &bits, 8);
    }
    return n;
}

void cli_store_genome_json(FILE *f, sqlite3_stmt *st, int col)
{
    const uint8_t *g = sqlite3_column_blob(st, col);
    size_t n = (size_t)sqlite3_column_bytes(st, col);
    if (n % 8 == 0) {
        fputc('[', f);
        for (size_t i = 0; i < n / 8; i++) {
            uint64_t bits = 0;
            double d;
            char num[32];
            for (int k = 0; k < 8; k++)
                bits |= (uint64_t)g[i * 8 + (size_t)k] << (8 * k);
            memcpy(&d, &bits, 8);
            proto_format_double(d, num);
            fprintf(f, "%s%s", i ? ", " : "", num);
        }
        fputc(']', f);
        return;
    }
    fputc('"', f);
    for (size_t i = 0; i < n; i++)
        fprintf(f, "%02x", g[i]);
    fputc('"', f);
}
