/* cmd_verify.c: `fitfarm verify RUN`: re-simulates stored evaluations of a run
 * on a pool, bypassing the cache, and compares the fitness bits.
 *
 * The originals and their provenance are read from the store (read-only).
 * The re-simulation is a fresh run (id "verify-RUN-<random>") with the
 * original run seed and seed mode and the no-cache flag, so every seed equals
 * the recorded one and nothing is answered from a stored result. Each genome
 * goes into a batch of its plugin and params with as many replicates as its
 * highest sampled replicate index needs (seeds depend on the index); only the
 * sampled slots are compared. The new side's provenance is read afterwards
 * from the store that recorded the verify run: the embedded pool's own
 * temporary store, or with --broker the store given by --pool-store
 * (default: --store, the usual case of a broker verifying its own store).
 * Not here: the comparison of runs with each other (export them). */
#include <inttypes.h>
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli_keys.h"
#include "cli_pool.h"
#include "cli_store.h"
#include "cli_util.h"
#include "client/include/fitfarm.h"
#include "commands.h"
#include "key.h"
#include "limits.h"
#include "params.h"

static const char s_help[] =
    "usage: fitfarm verify RUN [--store DIR] [--sample N] [--broker ENDPOINT | --plugin-dir DIR]\n"
    "\n"
    "Re-simulates stored evaluations of run RUN on a pool, bypassing the cache,\n"
    "with the run's seed and seed mode (so every seed is the recorded one), and\n"
    "reports each result whose fitness differs in any bit: both values, and the\n"
    "worker, host, architecture and plugin build digest of each side.\n"
    "\n"
    "options:\n"
    "  --store DIR         the store that recorded RUN (read-only; default ./" CLI_DEFAULT_STORE ")\n"
    "  --sample N          re-simulate N evaluations spread evenly over the run\n"
    "                      (default: all of them)\n"
    "  --broker ENDPOINT   re-simulate on the pool behind this broker; without it an\n"
    "                      embedded local pool runs with its own temporary store\n"
    "  --pool-store DIR    with --broker: the broker's store, read for the new side's\n"
    "                      provenance (default: --store)\n"
    "  --plugin-dir DIR    embedded pool: load plugins from DIR first\n"
    "  --slots N           embedded pool: worker slots (default: online CPUs)\n"
    "  --timeout SECONDS   give up after this long (default: no limit)\n"
    "\n"
    "exit status: 0 every bit matched, 1 a mismatch (or the pool failed), 2 usage.\n";

typedef struct {
    uint8_t key[PROTO_KEY_BYTES];
    char *plugin, *params;
    uint8_t *genome;
    size_t genome_len;
    unsigned replicate;
    size_t n_fit;
    double fit[PROTO_MAX_OBJECTIVES];
    char *worker, *host, *arch;
    char digest[2 * PROTO_DIGEST_BYTES + 1];
    /* where it went */
    size_t group, index;
} verify_item_t;

typedef struct {
    char *plugin, *params;
    unsigned replicates;
    fitfarm_batch_t *batch;
} verify_group_t;

static char *s_col_dup(sqlite3_stmt *st, int col)
{
    const char *t = (const char *)sqlite3_column_text(st, col);
    return strdup(t ? t : "");
}

static int s_usage(const char *fmt, const char *arg)
{
    fputs("fitfarm verify: ", stderr);
    fprintf(stderr, fmt, arg ? arg : "");
    fputs(" (see fitfarm verify --help)\n", stderr);
    return 2;
}

/* Reads the run's distinct stored ok evaluations, in request order. Each
 * names its plugin as name@version, so the pool re-simulates it with the
 * version its key was computed with (broker/catalog.h). */
static int s_load(sqlite3 *db, const char *run, verify_item_t **items_p, size_t *n_p)
{
    sqlite3_stmt *st = cli_store_prepare(
        db,
        "SELECT e.key, e.plugin || '@' || e.version, e.params, e.genome, min(q.replicate),"
        " e.fitness, e.worker,"
        " e.host, e.arch, e.digest FROM requests q JOIN evaluations e ON e.key = q.key"
        " WHERE q.run_id = ?1 AND e.status = 0 GROUP BY e.key ORDER BY min(q.tag)",
        "fitfarm verify");
    if (!st)
        return -1;
    sqlite3_bind_text(st, 1, run, -1, SQLITE_STATIC);
    verify_item_t *items = NULL;
    size_t n = 0, cap = 0;
    while (sqlite3_step(st) == SQLITE_ROW) {
        if (sqlite3_column_bytes(st, 0) != PROTO_KEY_BYTES)
            continue;
        if (n == cap) {
            cap = cap ? cap * 2 : 256;
            verify_item_t *v = realloc(items, cap * sizeof *v);
            if (!v)
                break;
            items = v;
        }
        verify_item_t *it = &items[n++];
        memset(it, 0, sizeof *it);
        memcpy(it->key, sqlite3_column_blob(st, 0), PROTO_KEY_BYTES);
        it->plugin = s_col_dup(st, 1);
        it->params = s_col_dup(st, 2);
        it->genome_len = (size_t)sqlite3_column_bytes(st, 3);
        it->genome = malloc(it->genome_len ? it->genome_len : 1);
        if (it->genome && it->genome_len)
            memcpy(it->genome, sqlite3_column_blob(st, 3), it->genome_len);
        it->replicate = (unsigned)sqlite3_column_int(st, 4);
        it->n_fit = cli_store_doubles(st, 5, it->fit, PROTO_MAX_OBJECTIVES);
        it->worker = s_col_dup(st, 6);
        it->host = s_col_dup(st, 7);
        it->arch = s_col_dup(st, 8);
        cli_store_hex(st, 9, it->digest, PROTO_DIGEST_BYTES);
    }
    sqlite3_finalize(st);
    *items_p = items;
    *n_p = n;
    return 0;
}

static void s_bits(double v, char out[64])
{
    uint64_t b;
    char num[32];
    memcpy(&b, &v, 8);
    proto_format_double(v, num);
    snprintf(out, 64, "%.31s (0x%016" PRIx64 ")", num, b);
}

int cli_cmd_verify(int argc, char **argv)
{
    const char *run = NULL, *store = NULL, *broker = NULL, *pool_store = NULL, *plugin_dir = NULL;
    uint64_t sample = 0, slots = 0, timeout_s = 0;
    int rc = 0;
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        const char *arg = argv[i];
        if (strcmp(arg, "--help") == 0 || strcmp(arg, "-h") == 0) {
            fputs(s_help, stdout);
            fputs("\nsecurity, with --broker:\n", stdout);
            fputs(cli_keys_help, stdout);
            return 0;
        }
        if (cli_match_value(argc, argv, &i, "--store", &v)) {
            if (!(store = v))
                return s_usage("--store needs a folder%s", NULL);
        } else if (cli_match_value(argc, argv, &i, "--broker", &v)) {
            if (!(broker = v))
                return s_usage("--broker needs an endpoint%s", NULL);
        } else if (cli_match_value(argc, argv, &i, "--pool-store", &v)) {
            if (!(pool_store = v))
                return s_usage("--pool-store needs a folder%s", NULL);
        } else if (cli_match_value(argc, argv, &i, "--plugin-dir", &v)) {
            if (!(plugin_dir = v))
                return s_usage("--plugin-dir needs a folder%s", NULL);
        } else if (cli_match_value(argc, argv, &i, "--sample", &v)) {
            if (!v || cli_parse_u64(v, 1, UINT32_MAX, &sample) != 0)
                return s_usage("--sample needs a whole number from 1, not '%s'", v);
        } else if (cli_match_value(argc, argv, &i, "--slots", &v)) {
            if (!v || cli_parse_u64(v, 0, 4096, &slots) != 0)
                return s_usage("--slots needs a whole number from 0 to 4096, not '%s'", v);
        } else if (cli_match_value(argc, argv, &i, "--timeout", &v)) {
            if (!v || cli_parse_u64(v, 1, 2000000, &timeout_s) != 0)
                return s_usage("--timeout needs seconds, not '%s'", v);
        } else {
            int keys = cli_keys_option(argc, argv, &i, "fitfarm verify", &rc);
            if (keys > 0)
                continue;
            if (keys < 0)
                return rc;
            if (arg[0] == '-')
                return s_usage("unknown option %s", arg);
            if (run)
                return s_usage("unexpected argument '%s'", arg);
            run = arg;
        }
    }
    if (!run)
        return s_usage("which run? give its id (see fitfarm runs)%s", NULL);
    if (!store)
        store = CLI_DEFAULT_STORE;

    verify_item_t *items = NULL;
    verify_group_t *groups = NULL;
    size_t n_items = 0, n_groups = 0, n_pick = 0, mismatches = 0;
    size_t *pick = NULL;
    uint64_t run_seed = 0;
    int seed_mode = 0;
    fitfarm_client_t *client = NULL;
    fitfarm_run_t *vrun = NULL;
    char tmp[] = "/tmp/fitfarm-verify-XXXXXX";
    int made_tmp = 0;
    char vrun_id[PROTO_MAX_NAME_BYTES + 1];
    sqlite3 *db = cli_store_open(store, "fitfarm verify");
    sqlite3 *pdb = NULL;
    rc = 1;
    if (!db)
        goto cleanup;
    {
        sqlite3_stmt *st =
            cli_store_prepare(db, "SELECT seed, seed_mode FROM runs WHERE run_id = ?1",
                              "fitfarm verify");
        if (!st)
            goto cleanup;
        sqlite3_bind_text(st, 1, run, -1, SQLITE_STATIC);
        int found = sqlite3_step(st) == SQLITE_ROW;
        if (found) {
            run_seed = cli_store_u64(st, 0);
            seed_mode = sqlite3_column_int(st, 1);
        }
        sqlite3_finalize(st);
        if (!found) {
            fprintf(stderr, "fitfarm verify: the store has no run '%s' (see fitfarm runs "
                    "--store %s)\n", run, store);
            goto cleanup;
        }
    }
    if (s_load(db, run, &items, &n_items) != 0)
        goto cleanup;
    if (n_items == 0) {
        printf("verify %s: no stored ok evaluation to re-simulate\n", run);
        rc = 0;
        goto cleanup;
    }
    /* Evenly spread over the run, so a sample sees early and late work. */
    n_pick = sample && sample < n_items ? (size_t)sample : n_items;
    pick = calloc(n_pick, sizeof *pick);
    groups = calloc(n_pick, sizeof *groups);
    if (!pick || !groups)
        goto nomem;
    for (size_t k = 0; k < n_pick; k++) {
        pick[k] = (size_t)((uint64_t)k * n_items / n_pick);
        verify_item_t *it = &items[pick[k]];
        size_t g = 0;
        while (g < n_groups && (strcmp(groups[g].plugin, it->plugin) != 0 ||
                                strcmp(groups[g].params, it->params) != 0 ||
                                groups[g].replicates != it->replicate + 1))
            g++;
        if (g == n_groups) {
            groups[g].plugin = it->plugin;
            groups[g].params = it->params;
            groups[g].replicates = it->replicate + 1;
            if (fitfarm_batch_new(it->plugin, it->params, it->replicate + 1, &groups[g].batch) != 0)
                goto nomem;
            n_groups++;
        }
        long idx = fitfarm_batch_add_bytes(groups[g].batch, it->genome, it->genome_len);
        if (idx < 0)
            goto nomem;
        it->group = g;
        it->index = (size_t)idx;
    }

    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.broker = broker;
    opts.slots = (unsigned)slots;
    opts.plugin_dir = plugin_dir;
    if (!broker) {
        if (!mkdtemp(tmp)) {
            perror("fitfarm verify: a temporary store");
            goto cleanup;
        }
        made_tmp = 1;
        opts.store_dir = tmp;
    }
    if (cli_keys_apply(&opts, "fitfarm verify") != 0) {
        rc = 2;
        goto cleanup;
    }
    char err[1200];
    if (fitfarm_client_new(&opts, &client, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm verify: %s\n", err);
        goto cleanup;
    }
    {
        uint8_t raw[6];
        char hex[13];
        randombytes_buf(raw, sizeof raw);
        proto_hex(raw, sizeof raw, hex);
        snprintf(vrun_id, sizeof vrun_id, "verify-%.100s-%s", run, hex);
    }
    fitfarm_run_options_t ropts = FITFARM_RUN_OPTIONS_INIT;
    ropts.run_id = vrun_id;
    ropts.seed = run_seed;
    ropts.seed_mode = seed_mode;
    ropts.no_cache = 1;
    if (fitfarm_run_open(client, &ropts, &vrun) != 0) {
        fprintf(stderr, "fitfarm verify: %s\n", fitfarm_client_error(client));
        goto cleanup;
    }
    for (size_t g = 0; g < n_groups; g++) {
        char why[1024];
        if (cli_pool_plugin_blocked(client, groups[g].plugin, 5000, why, sizeof why))
            fprintf(stderr, "fitfarm verify: waiting: %s\n", why);
        if (fitfarm_evaluate(vrun, groups[g].batch, NULL, NULL,
                             timeout_s ? (int)(timeout_s * 1000 > INT32_MAX ? INT32_MAX
                                                                             : timeout_s * 1000)
                                       : -1) != 0) {
            fprintf(stderr, "fitfarm verify: %s\n", fitfarm_client_error(client));
            goto cleanup;
        }
    }
    /* The new side's provenance, from the store that recorded the verify run. */
    pdb = cli_store_open(broker ? (pool_store ? pool_store : store) : tmp, "fitfarm verify");
    sqlite3_stmt *pst = pdb ? cli_store_prepare(pdb,
                                                "SELECT worker, host, arch, digest FROM simulations"
                                                " WHERE run_id = ?1 AND key = ?2"
                                                " ORDER BY fresh DESC, finished_at DESC"
                                                " LIMIT 1",
                                                "fitfarm verify")
                            : NULL;
    for (size_t k = 0; k < n_pick; k++) {
        verify_item_t *it = &items[pick[k]];
        fitfarm_result_t res = FITFARM_RESULT_INIT;
        if (fitfarm_batch_result(groups[it->group].batch, it->index, it->replicate, &res) != 0)
            continue;
        int same = res.status == FITFARM_STATUS_OK && res.n_fitness == it->n_fit &&
                   memcmp(res.fitness, it->fit, it->n_fit * sizeof(double)) == 0 &&
                   memcmp(res.key, it->key, PROTO_KEY_BYTES) == 0;
        if (same)
            continue;
        mismatches++;
        char key[2 * PROTO_KEY_BYTES + 1];
        proto_hex(it->key, PROTO_KEY_BYTES, key);
        const char *w = "?", *h = "?", *a = "?";
        char d[2 * PROTO_DIGEST_BYTES + 1] = "?";
        if (pst) {
            sqlite3_bind_text(pst, 1, vrun_id, -1, SQLITE_STATIC);
            sqlite3_bind_blob(pst, 2, res.key, PROTO_KEY_BYTES, SQLITE_STATIC);
            if (sqlite3_step(pst) == SQLITE_ROW) {
                w = (const char *)sqlite3_column_text(pst, 0);
                h = (const char *)sqlite3_column_text(pst, 1);
                a = (const char *)sqlite3_column_text(pst, 2);
                cli_store_hex(pst, 3, d, PROTO_DIGEST_BYTES);
            }
        }
        printf("mismatch: run %s key %s (replicate %u):\n", run, key, it->replicate);
        printf("  stored:  worker %s, host %s, arch %s, build %s\n", it->worker, it->host,
               it->arch, it->digest[0] ? it->digest : "?");
        printf("  now:     worker %s, host %s, arch %s, build %s\n", w ? w : "?", h ? h : "?",
               a ? a : "?", d[0] ? d : "?");
        if (res.status != FITFARM_STATUS_OK) {
            printf("  now the evaluation ended %s: %s\n", fitfarm_status_name(res.status),
                   res.error);
        } else {
            size_t n = res.n_fitness > it->n_fit ? res.n_fitness : it->n_fit;
            for (size_t j = 0; j < n; j++) {
                char was[64] = "(none)", now[64] = "(none)";
                if (j < it->n_fit)
                    s_bits(it->fit[j], was);
                if (j < res.n_fitness)
                    s_bits(res.fitness[j], now);
                if (j < it->n_fit && j < res.n_fitness &&
                    memcmp(&it->fit[j], &res.fitness[j], sizeof(double)) == 0)
                    continue;
                printf("  objective %zu: stored %s, now %s\n", j, was, now);
            }
        }
        if (pst) {
            sqlite3_reset(pst);
            sqlite3_clear_bindings(pst);
        }
    }
    sqlite3_finalize(pst);
    printf("verify %s: %zu of %zu stored evaluations re-simulated, %zu mismatches\n", run, n_pick,
           n_items, mismatches);
    rc = mismatches ? 1 : 0;
    goto cleanup;
nomem:
    fprintf(stderr, "fitfarm verify: out of memory\n");
    rc = 1;
cleanup:
    fitfarm_run_destroy(&vrun);
    fitfarm_client_destroy(&client);
    for (size_t g = 0; g < n_groups; g++)
        fitfarm_batch_destroy(&groups[g].batch);
    free(groups);
    free(pick);
    for (size_t i = 0; i < n_items; i++) {
        free(items[i].plugin);
        free(items[i].params);
        free(items[i].genome);
        free(items[i].worker);
        free(items[i].host);
        free(items[i].arch);
    }
    free(items);
    sqlite3_close(pdb);
    sqlite3_close(db);
    if (made_tmp) {
        char cmd[sizeof tmp + 64];
        snprintf(cmd, sizeof cmd, "%s/fitfarm.db", tmp);
        unlink(cmd);
        snprintf(cmd, sizeof cmd, "%s/fitfarm.db-wal", tmp);
        unlink(cmd);
        snprintf(cmd, sizeof cmd, "%s/fitfarm.db-shm", tmp);
        unlink(cmd);
        snprintf(cmd, sizeof cmd, "%s/fitfarm.lock", tmp);
        unlink(cmd);
        rmdir(tmp);
    }
    return rc;
}
