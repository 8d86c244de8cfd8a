/* cmd_runs.c: `fitfarm runs` (the runs a store holds, with their counts and
 * activity) and `fitfarm export` (every request and result of one run, with
 * provenance, as JSON Lines or CSV). Both read the store file directly,
 * read-only (cli_store.h), so they work while the broker runs and after it
 * is gone. Not here: re-simulating a run (cmd_verify.c). */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli_store.h"
#include "cli_util.h"
#include "commands.h"
#include "key.h"
#include "limits.h"
#include "params.h"

static const char s_runs_help[] =
    "usage: fitfarm runs [--store DIR] [--json]\n"
    "\n"
    "Lists the runs a store holds: id, run seed, seed mode, plugin, requests,\n"
    "evaluated (simulations the run paid for), cached (requests answered from a\n"
    "stored result), failed (requests whose result is not ok), first and last\n"
    "activity (UTC). Reads DIR/fitfarm.db read-only; the broker may be running.\n"
    "\n"
    "options:\n"
    "  --store DIR   the store folder (the broker's --store, or fitfarm eval --store;\n"
    "                default ./" CLI_DEFAULT_STORE ", the broker's default)\n"
    "  --json        one JSON object per run, one per line\n"
    "\n"
    "exit status: 0 ok, 1 the store cannot be read, 2 usage error.\n";

static const char s_export_help[] =
    "usage: fitfarm export RUN [--store DIR] [--format jsonl|csv] [--out FILE]\n"
    "\n"
    "Writes every request of run RUN in request order with its result and the\n"
    "provenance of that result: run, tag, batch_tag, replicate, cached, no_cache,\n"
    "key, plugin, version, params, genome, seed, status, fitness, error, attempts,\n"
    "worker, host, arch, digest (the plugin build), cpu_seconds, peak_rss_kb,\n"
    "requested_at, finished_at (when it was answered: for a cached request, when it was\n"
    "asked), computed_at (when its evaluation finished). A no-cache request shows its\n"
    "own re-evaluation; attempts counts dispatches that crashed, timed out or were\n"
    "lost with a worker that vanished.\n"
    "\n"
    "options:\n"
    "  --store DIR      the store folder (default ./" CLI_DEFAULT_STORE ")\n"
    "  --format FORMAT  jsonl (default) or csv (RFC 4180, header line first;\n"
    "                   genome and fitness as JSON arrays in one field)\n"
    "  --out FILE       write to FILE (default stdout)\n"
    "\n"
    "exit status: 0 ok, 1 the store cannot be read or the run is unknown, 2 usage.\n";

static int s_usage(const char *cmd, const char *fmt, const char *arg)
{
    fprintf(stderr, "fitfarm %s: ", cmd);
    fprintf(stderr, fmt, arg ? arg : "");
    fprintf(stderr, " (see fitfarm %s --help)\n", cmd);
    return 2;
}

int cli_cmd_runs(int argc, char **argv)
{
    const char *store = NULL;
    int json = 0;
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_runs_help, stdout);
            return 0;
        }
        if (cli_match_value(argc, argv, &i, "--store", &v)) {
            if (!v)
                return s_usage("runs", "--store needs a folder%s", NULL);
            store = v;
        } else if (strcmp(argv[i], "--json") == 0) {
            json = 1;
        } else {
            return s_usage("runs", "unknown argument %s", argv[i]);
        }
    }
    if (!store)
        store = CLI_DEFAULT_STORE;
    sqlite3 *db = cli_store_open(store, "fitfarm runs");
    if (!db)
        return 1;
    sqlite3_stmt *st = cli_store_prepare(
        db,
        "SELECT r.run_id, r.seed, r.seed_mode, r.created, r.last_activity,"
        " (SELECT count(*) FROM requests q WHERE q.run_id = r.run_id),"
        " coalesce(s.n, 0),"
        " (SELECT coalesce(sum(q.cached), 0) FROM requests q WHERE q.run_id = r.run_id),"
        " (SELECT count(*) FROM requests q JOIN evaluations e ON e.key = q.key"
        "   WHERE q.run_id = r.run_id AND e.status IS NOT NULL AND e.status <> 0),"
        " (SELECT group_concat(p, ',') FROM (SELECT DISTINCT e.plugin AS p FROM requests q"
        "   JOIN evaluations e ON e.key = q.key WHERE q.run_id = r.run_id))"
        /* one pass over the simulations (evaluations has no run_id index) */
        " FROM runs r LEFT JOIN (SELECT run_id, count(*) AS n FROM simulations GROUP BY run_id) s"
        " ON s.run_id = r.run_id ORDER BY r.created, r.run_id",
        "fitfarm runs");
    if (!st) {
        sqlite3_close(db);
        return 1;
    }
    if (!json)
        printf("%-24s %20s %-6s %-12s %9s %9s %9s %7s  %-24s %-24s\n", "RUN", "SEED", "MODE",
               "PLUGIN", "REQUESTS", "EVALUATED", "CACHED", "FAILED", "FIRST", "LAST");
    int rc = 0;
    int step;
    while ((step = sqlite3_step(st)) == SQLITE_ROW) {
        const char *id = (const char *)sqlite3_column_text(st, 0);
        const char *plugin = (const char *)sqlite3_column_text(st, 9);
        char first[32], last[32];
        cli_store_time(st, 3, first);
        cli_store_time(st, 4, last);
        const char *mode = sqlite3_column_int(st, 2) == 1 ? "common" : "genome";
        if (json) {
            fputs("{\"run\": ", stdout);
            cli_json_string(stdout, id ? id : "");
            printf(", \"seed\": \"%" PRIu64 "\", \"seed_mode\": \"%s\", \"plugin\": ",
                   cli_store_u64(st, 1), mode);
            cli_json_string(stdout, plugin ? plugin : "");
            printf(", \"requests\": %lld, \"evaluated\": %lld, \"cached\": %lld, \"failed\": %lld"
                   ", \"first\": \"%s\", \"last\": \"%s\"}\n",
                   (long long)sqlite3_column_int64(st, 5), (long long)sqlite3_column_int64(st, 6),
                   (long long)sqlite3_column_int64(st, 7), (long long)sqlite3_column_int64(st, 8),
                   first, last);
        } else {
            printf("%-24s %20" PRIu64 " %-6s %-12s %9lld %9lld %9lld %7lld  %-24s %-24s\n",
                   id ? id : "", cli_store_u64(st, 1), mode, plugin ? plugin : "-",
                   (long long)sqlite3_column_int64(st, 5), (long long)sqlite3_column_int64(st, 6),
                   (long long)sqlite3_column_int64(st, 7), (long long)sqlite3_column_int64(st, 8),
                   first, last);
        }
    }
    if (step != SQLITE_DONE) {
        fprintf(stderr, "fitfarm runs: reading the store failed: %s\n", sqlite3_errmsg(db));
        rc = 1;
    }
    sqlite3_finalize(st);
    sqlite3_close(db);
    return rc;
}

/* Column numbers of the export query. For a no-cache request the result
 * columns come from its re-evaluation (X_*) rather than the cache row (E_*). */
enum {
    C_TAG, C_BATCH, C_REP, C_CACHED, C_FRESH, C_KEY, C_PLUGIN, C_VERSION, C_PARAMS, C_GENOME,
    C_SEED, C_REQUESTED, E_STATUS, E_FITNESS, E_ERROR, E_ATTEMPTS, E_WORKER, E_HOST, E_ARCH,
    E_DIGEST, E_CPU, E_RSS, E_FINISHED, X_FIRST
};

static const char s_export_sql[] =
    "SELECT q.tag, q.batch_tag, q.replicate, q.cached, q.fresh, q.key, e.plugin, e.version,"
    " e.params, e.genome, e.seed, q.created,"
    " e.status_name, e.fitness, e.error, e.attempts, e.worker, e.host, e.arch, e.digest,"
    " e.cpu_seconds, e.peak_rss_kb, e.finished_at,"
    " x.status_name, x.fitness, x.error, x.attempts, x.worker, x.host, x.arch, x.digest,"
    " x.cpu_seconds, x.peak_rss_kb, x.finished_at"
    " FROM requests q JOIN evaluations e ON e.key = q.key"
    " LEFT JOIN results x ON q.fresh = 1 AND x.rowid = (SELECT max(y.rowid) FROM results y"
    "  WHERE y.run_id = q.run_id AND y.key = q.key AND y.fresh = 1)"
    " WHERE q.run_id = ?1 ORDER BY q.tag";

/* A CSV field: quoted, with quotes doubled (RFC 4180). */
static void s_csv_text(FILE *f, const char *s)
{
    fputc('"', f);
    for (; s && *s; s++) {
        if (*s == '"')
            fputc('"', f);
        fputc(*s, f);
    }
    fputc('"', f);
}

static void s_fitness_json(FILE *f, sqlite3_stmt *st, int col)
{
    double v[PROTO_MAX_OBJECTIVES];
    if (sqlite3_column_type(st, col) == SQLITE_NULL) {
        fputs("null", f);
        return;
    }
    size_t n = cli_store_doubles(st, col, v, PROTO_MAX_OBJECTIVES);
    fputc('[', f);
    for (size_t i = 0; i < n; i++) {
        char num[32];
        proto_format_double(v[i], num);
        fprintf(f, "%s%s", i ? ", " : "", num);
    }
    fputc(']', f);
}

static void s_export_row(FILE *f, sqlite3_stmt *st, const char *run, int csv)
{
    int r = sqlite3_column_int(st, C_FRESH) && sqlite3_column_type(st, X_FIRST) != SQLITE_NULL
                ? X_FIRST - E_STATUS
                : 0;
    char key[2 * PROTO_KEY_BYTES + 1], digest[2 * PROTO_DIGEST_BYTES + 1];
    char requested[32], finished[32];
    cli_store_hex(st, C_KEY, key, PROTO_KEY_BYTES);
    cli_store_hex(st, E_DIGEST + r, digest, PROTO_DIGEST_BYTES);
    char computed[32];
    cli_store_time(st, C_REQUESTED, requested);
    cli_store_time(st, E_FINISHED + r, computed);
    /* A cached request was answered when it was asked, from a result
     * computed before: finished_at is the answer's time, computed_at the
     * evaluation's, so no row reads as finished before it was requested. */
    snprintf(finished, sizeof finished, "%s",
             sqlite3_column_int(st, C_CACHED) && computed[0] ? requested : computed);
    const char *status = (const char *)sqlite3_column_text(st, E_STATUS + r);
    const char *text[] = {
        (const char *)sqlite3_column_text(st, C_PLUGIN),
        (const char *)sqlite3_column_text(st, C_VERSION),
        (const char *)sqlite3_column_text(st, C_PARAMS),
        (const char *)sqlite3_column_text(st, E_ERROR + r),
        (const char *)sqlite3_column_text(st, E_WORKER + r),
        (const char *)sqlite3_column_text(st, E_HOST + r),
        (const char *)sqlite3_column_text(st, E_ARCH + r),
    };
    char cpu[32] = "", rss[32] = "", attempts[32] = "";
    if (sqlite3_column_type(st, E_CPU + r) != SQLITE_NULL)
        proto_format_double(sqlite3_column_double(st, E_CPU + r), cpu);
    if (sqlite3_column_type(st, E_RSS + r) != SQLITE_NULL)
        snprintf(rss, sizeof rss, "%lld", (long long)sqlite3_column_int64(st, E_RSS + r));
    if (sqlite3_column_type(st, E_ATTEMPTS + r) != SQLITE_NULL)
        snprintf(attempts, sizeof attempts, "%d", sqlite3_column_int(st, E_ATTEMPTS + r));
    const char *cached = sqlite3_column_int(st, C_CACHED) ? "true" : "false";
    const char *fresh = sqlite3_column_int(st, C_FRESH) ? "true" : "false";
    if (csv) {
        s_csv_text(f, run);
        fprintf(f, ",%" PRIu64 ",%" PRIu64 ",%d,%s,%s,%s,", cli_store_u64(st, C_TAG),
                cli_store_u64(st, C_BATCH), sqlite3_column_int(st, C_REP), cached, fresh, key);
        for (int i = 0; i < 3; i++) {
            s_csv_text(f, text[i]);
            fputc(',', f);
        }
        fputc('"', f);
        cli_store_genome_json(f, st, C_GENOME);
        fprintf(f, "\",%" PRIu64 ",%s,\"", cli_store_u64(st, C_SEED), status ? status : "pending");
        s_fitness_json(f, st, E_FITNESS + r);
        fputs("\",", f);
        s_csv_text(f, text[3]);
        fprintf(f, ",%s,", attempts);
        for (int i = 4; i < 7; i++) {
            s_csv_text(f, text[i]);
            fputc(',', f);
        }
        fprintf(f, "%s,%s,%s,%s,%s,%s\n", digest, cpu, rss, requested, finished, computed);
        return;
    }
    fputs("{\"run\": ", f);
    cli_json_string(f, run);
    fprintf(f, ", \"tag\": %" PRIu64 ", \"batch_tag\": %" PRIu64 ", \"replicate\": %d, "
            "\"cached\": %s, \"no_cache\": %s, \"key\": \"%s\", \"plugin\": ",
            cli_store_u64(st, C_TAG), cli_store_u64(st, C_BATCH), sqlite3_column_int(st, C_REP),
            cached, fresh, key);
    cli_json_string(f, text[0] ? text[0] : "");
    fputs(", \"version\": ", f);
    cli_json_string(f, text[1] ? text[1] : "");
    fputs(", \"params\": ", f);
    cli_json_string(f, text[2] ? text[2] : "");
    fputs(", \"genome\": ", f);
    cli_store_genome_json(f, st, C_GENOME);
    fprintf(f, ", \"seed\": \"%" PRIu64 "\", \"status\": \"%s\", \"fitness\": ",
            cli_store_u64(st, C_SEED), status ? status : "pending");
    s_fitness_json(f, st, E_FITNESS + r);
    fputs(", \"error\": ", f);
    cli_json_string(f, text[3] ? text[3] : "");
    fprintf(f, ", \"attempts\": %s", attempts[0] ? attempts : "null");
    const char *names[] = {"worker", "host", "arch"};
    for (int i = 4; i < 7; i++) {
        fprintf(f, ", \"%s\": ", names[i - 4]);
        if (text[i])
            cli_json_string(f, text[i]);
        else
            fputs("null", f);
    }
    fprintf(f, ", \"digest\": %s%s%s, \"cpu_seconds\": %s, \"peak_rss_kb\": %s, "
            "\"requested_at\": \"%s\", \"finished_at\": %s%s%s, \"computed_at\": %s%s%s}\n",
            digest[0] ? "\"" : "", digest[0] ? digest : "null", digest[0] ? "\"" : "",
            cpu[0] ? cpu : "null", rss[0] ? rss : "null", requested, finished[0] ? "\"" : "",
            finished[0] ? finished : "null", finished[0] ? "\"" : "", computed[0] ? "\"" : "",
            computed[0] ? computed : "null", computed[0] ? "\"" : "");
}

int cli_cmd_export(int argc, char **argv)
{
    const char *store = NULL, *run = NULL, *format = "jsonl", *out_path = NULL;
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_export_help, stdout);
            return 0;
        }
        if (cli_match_value(argc, argv, &i, "--store", &v)) {
            if (!v)
                return s_usage("export", "--store needs a folder%s", NULL);
            store = v;
        } else if (cli_match_value(argc, argv, &i, "--format", &v)) {
            if (!v || (strcmp(v, "jsonl") != 0 && strcmp(v, "csv") != 0))
                return s_usage("export", "--format is jsonl or csv, not '%s'", v);
            format = v;
        } else if (cli_match_value(argc, argv, &i, "--out", &v)) {
            if (!v)
                return s_usage("export", "--out needs a file%s", NULL);
            out_path = v;
        } else if (argv[i][0] == '-') {
            return s_usage("export", "unknown option %s", argv[i]);
        } else if (!run) {
            run = argv[i];
        } else {
            return s_usage("export", "unexpected argument '%s'", argv[i]);
        }
    }
    if (!run)
        return s_usage("export", "which run? give its id (see fitfarm runs)%s", NULL);
    if (!store)
        store = CLI_DEFAULT_STORE;
    int csv = strcmp(format, "csv") == 0;
    sqlite3 *db = cli_store_open(store, "fitfarm export");
    if (!db)
        return 1;
    int rc = 1;
    FILE *f = stdout;
    sqlite3_stmt *st = cli_store_prepare(db, "SELECT 1 FROM runs WHERE run_id = ?1",
                                         "fitfarm export");
    if (!st)
        goto cleanup;
    sqlite3_bind_text(st, 1, run, -1, SQLITE_STATIC);
    int known = sqlite3_step(st) == SQLITE_ROW;
    sqlite3_finalize(st);
    st = NULL;
    if (!known) {
        fprintf(stderr, "fitfarm export: the store has no run '%s' (see fitfarm runs --store "
                "%s)\n", run, store);
        goto cleanup;
    }
    st = cli_store_prepare(db, s_export_sql, "fitfarm export");
    if (!st)
        goto cleanup;
    sqlite3_bind_text(st, 1, run, -1, SQLITE_STATIC);
    if (out_path && strcmp(out_path, "-") != 0) {
        f = fopen(out_path, "we");
        if (!f) {
            perror(out_path);
            f = stdout;
            goto cleanup;
        }
    }
    if (csv)
        fputs("run,tag,batch_tag,replicate,cached,no_cache,key,plugin,version,params,genome,seed,"
              "status,fitness,error,attempts,worker,host,arch,digest,cpu_seconds,peak_rss_kb,"
              "requested_at,finished_at,computed_at\n", f);
    int step;
    while ((step = sqlite3_step(st)) == SQLITE_ROW)
        s_export_row(f, st, run, csv);
    if (step != SQLITE_DONE) {
        fprintf(stderr, "fitfarm export: reading the store failed: %s\n", sqlite3_errmsg(db));
        goto cleanup;
    }
    if (fflush(f) != 0 || ferror(f)) {
        fprintf(stderr, "fitfarm export: writing failed\n");
        goto cleanup;
    }
    rc = 0;
cleanup:
    if (f != stdout)
        fclose(f);
    sqlite3_finalize(st);
    sqlite3_close(db);
    return rc;
}
