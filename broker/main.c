/* main.c: fitfarm-broker's command line. Parses flags into broker_config_t
 * and calls broker_main_run; nothing else lives here. Usage errors exit 2. */
#include <errno.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "broker.h"
#include "http.h"
#include "common/config.h"
#include "common/lifeline.h"

#ifndef FITFARM_VERSION
#define FITFARM_VERSION "0.0.0"
#endif

static void s_usage(FILE *out)
{
    fprintf(out,
            "usage: fitfarm-broker --clients ENDPOINT --workers ENDPOINT [options]\n"
            "\n"
            "Queues fitness evaluations from clients and hands them to workers.\n"
            "\n"
            "  --clients EP          bind address for clients, e.g. tcp://0.0.0.0:5555\n"
            "                        (tcp://127.0.0.1:* picks a free port)\n"
            "  --workers EP          bind address for workers, e.g. tcp://0.0.0.0:5556\n"
            "  --store DIR           durable store folder (SQLite, DIR/fitfarm.db; default\n"
            "                        ./fitfarm-store). Runs, accepted requests and results\n"
            "                        survive a restart; one broker per store\n"
            "  --lost-after MS       a worker silent this long is lost: dropped, its jobs\n"
            "                        re-queued (default 5000; formerly --liveness)\n"
            "  --heartbeat MS        heartbeat interval to workers (default 1000)\n"
            "  --attempts N          tries of a job that crashes or times out (default 3)\n"
            "  --speculate-after X   when nothing is queued and a worker is idle, a job\n"
            "                        running longer than X times its plugin's median gets a\n"
            "                        copy on a worker expected to finish sooner; the first\n"
            "                        result wins, the other copy is cancelled (default 1.5)\n"
            "  --no-speculation      never start such copies\n"
            "  --endpoints-file FILE write the bound endpoints there as\n"
            "                        \"clients EP\\nworkers EP\\n\" (atomically, once both are\n"
            "                        listening: a starter waits for this file to know the\n"
            "                        broker is ready)\n"
            "  --pid-file FILE       write this process's PID there once listening; removed\n"
            "                        at exit; refuses to start while FILE names a live\n"
            "                        process. Reload allow-lists: kill -HUP \"$(cat FILE)\"\n"
            "  --lifeline-fd N       descriptor N (3..1023) is the read end of a pipe held\n"
            "                        open by the process that started the broker; when it\n"
            "                        reads end of file (that process died) the broker stops\n"
            "                        as on SIGTERM\n"
            "  --key FILE            the broker's secret key (fitfarm keygen broker);\n"
            "                        or FITFARM_KEY, or 'key =' in the config file\n"
            "  --keys DIR            folder with clients.allow and workers.allow (fitfarm\n"
            "                        allow); or FITFARM_KEYS_DIR, or 'keys_dir =' in the config\n"
            "  --config FILE         settings file (default $XDG_CONFIG_HOME/fitfarm/config or\n"
            "                        ~/.config/fitfarm/config); flags beat environment beat file\n"
            "  --insecure            plaintext, no keys: only on ipc://, inproc:// or loopback\n"
            "  --lock-wait SECONDS   wait this long for another broker's lock on the store (a\n"
            "                        predecessor still ending after a crash; default 10)\n"
            "  --scratch-store       the store is thrown away after use: commit without fsync,\n"
            "                        rollback journal in memory (a machine crash may lose it;\n"
            "                        never for a store you keep)\n"
            "  --max-message-bytes N cap on any one message (default 67108864)\n"
            "  --max-genome-bytes N  cap on one genome (default 1048576)\n"
            "  --max-batch N         cap on items in one SUBMIT (default 100000)\n"
            "  --max-objectives N    cap on fitness values in one result (default 64)\n"
            "  --max-string-bytes N  cap on run ids and names (default 128)\n"
            "  --max-queued-per-run N     requests waiting per run (default 1000000)\n"
            "  --max-queued-per-key N     requests waiting per client key, over its runs\n"
            "                        (default 4000000; --max-queued-per-client is the same)\n"
            "  --max-queued-bytes-per-run N  bytes of queued evaluations (genomes plus\n"
            "                        about 250 bytes each) per run (default 268435456)\n"
            "  --max-queued-bytes-per-key N  the same per client key (default 536870912)\n"
            "  --max-queued-bytes N  the same in all (default 1073741824)\n"
            "                        past a cap a batch is refused with \"queue full\"\n"
            "  --max-runs-per-key N  runs held in RAM per client key (default 20000); an\n"
            "                        idle run leaves RAM 60 s after its last use\n"
            "  --max-runs N          the same in all (default 100000); past either a new run\n"
            "                        is refused with \"too many runs\"\n"
            "  --max-unacked-per-run N    results held in RAM for a run's client until it\n"
            "                        acknowledges (default 100000); past it they wait in\n"
            "                        the store and are read back as the client catches up\n"
            "  --max-unacked N       the same over all runs (default 1000000)\n"
            "  --cache-entries N     finished results kept in RAM (default 1000000); others\n"
            "                        are read from the store when asked for\n"
            "  --cache-mb N          their approximate size in MiB (default 256)\n"
            "  --http [HOST:]PORT    serve metrics (Prometheus text) at http://HOST:PORT/metrics;\n"
            "                        off by default; HOST defaults to 127.0.0.1 (the page\n"
            "                        needs no credentials: keep it on loopback, README\n"
            "                        \"Metrics\"); port 0 picks a free one (endpoints file)\n"
            "  --help                this text\n"
            "  --version             print the version\n"
            "\n"
            "Stops cleanly on SIGTERM or SIGINT; SIGHUP reloads the allow-lists. Log level: FITFARM_LOG=debug|info|warn|error.\n");
}

static int s_bad(const char *fmt, const char *arg)
{
    fprintf(stderr, "fitfarm-broker: ");
    fprintf(stderr, fmt, arg);
    fprintf(stderr, "\nTry 'fitfarm-broker --help'.\n");
    return 2;
}

static int s_parse_int(const char *s, long lo, long hi, long *out)
{
    char *end = NULL;
    errno = 0;
    long v = strtol(s, &end, 10);
    if (errno || !end || *end || end == s || v < lo || v > hi)
        return -1;
    *out = v;
    return 0;
}

/* --max-* flags; each at least 1 and at most its protocol ceiling. */
static int s_limit(const char *a, const char *v, broker_config_t *cfg)
{
    long n = 0;
    if (strcmp(a, "--max-message-bytes") == 0 && s_parse_int(v, 4096, 64L << 20, &n) == 0)
        cfg->max_message_bytes = (uint32_t)n;
    else if (strcmp(a, "--max-genome-bytes") == 0 && s_parse_int(v, 1, 1L << 20, &n) == 0)
        cfg->max_genome_bytes = (uint32_t)n;
    else if (strcmp(a, "--max-batch") == 0 && s_parse_int(v, 1, 100000, &n) == 0)
        cfg->max_batch = (uint32_t)n;
    else if (strcmp(a, "--max-objectives") == 0 && s_parse_int(v, 1, 64, &n) == 0)
        cfg->max_objectives = (uint32_t)n;
    else if (strcmp(a, "--max-string-bytes") == 0 && s_parse_int(v, 8, 128, &n) == 0)
        cfg->max_string_bytes = (uint32_t)n;
    else if (strcmp(a, "--max-queued-per-run") == 0 && s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_queued_per_run = (uint64_t)n;
    else if ((strcmp(a, "--max-queued-per-client") == 0 ||
              strcmp(a, "--max-queued-per-key") == 0) &&
             s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_queued_per_client = (uint64_t)n;
    else if (strcmp(a, "--max-queued-bytes-per-run") == 0 &&
             s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_queued_bytes_per_run = (uint64_t)n;
    else if (strcmp(a, "--max-queued-bytes-per-key") == 0 &&
             s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_queued_bytes_per_key = (uint64_t)n;
    else if (strcmp(a, "--max-queued-bytes") == 0 && s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_queued_bytes = (uint64_t)n;
    else if (strcmp(a, "--max-runs-per-key") == 0 && s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_runs_per_key = (uint64_t)n;
    else if (strcmp(a, "--max-runs") == 0 && s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_runs = (uint64_t)n;
    else if (strcmp(a, "--max-unacked-per-run") == 0 && s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_unacked_per_run = (uint64_t)n;
    else if (strcmp(a, "--max-unacked") == 0 && s_parse_int(v, 1, LONG_MAX, &n) == 0)
        cfg->max_unacked = (uint64_t)n;
    else
        return -1;
    return 0;
}

int main(int argc, char **argv)
{
    broker_config_t cfg = {0};
    const char *config_path = NULL;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            s_usage(stdout);
            return 0;
        }
        if (strcmp(a, "--version") == 0) {
            printf("fitfarm-broker %s\n", FITFARM_VERSION);
            return 0;
        }
        if (strcmp(a, "--insecure") == 0) {
            cfg.insecure = 1;
            continue;
        }
        if (strcmp(a, "--scratch-store") == 0) {
            cfg.scratch_store = 1;
            continue;
        }
        if (strcmp(a, "--no-speculation") == 0) {
            cfg.no_speculation = 1;
            continue;
        }
        static const char *const with_value[] = {
            "--clients",          "--workers",          "--store",
            "--liveness",         "--lost-after",       "--heartbeat",        "--attempts",
            "--endpoints-file",   "--pid-file",         "--key",              "--keys",
            "--config",           "--max-message-bytes", "--max-genome-bytes",
            "--max-batch",        "--max-objectives",   "--max-string-bytes",
            "--max-queued-per-run", "--max-queued-per-client", "--max-unacked-per-run",
            "--max-unacked",      "--cache-entries",    "--cache-mb",
            "--max-queued-per-key", "--max-queued-bytes-per-run", "--max-queued-bytes-per-key",
            "--max-queued-bytes", "--max-runs-per-key", "--max-runs",
            "--lock-wait",        "--lifeline-fd",      "--http",  "--speculate-after"};
        int known = 0;
        for (size_t k = 0; k < sizeof with_value / sizeof *with_value; k++)
            known |= strcmp(a, with_value[k]) == 0;
        if (!known)
            return s_bad("unknown option '%s'", a);
        if (i + 1 >= argc)
            return s_bad("option '%s' needs a value", a);
        const char *v = argv[++i];
        long n = 0;
        if (strcmp(a, "--clients") == 0) {
            cfg.clients_endpoint = v;
        } else if (strcmp(a, "--workers") == 0) {
            cfg.workers_endpoint = v;
        } else if (strcmp(a, "--store") == 0) {
            cfg.store_dir = v;
        } else if (strcmp(a, "--http") == 0) {
            struct sockaddr_storage addr;
            int loopback = 0;
            char herr[256];
            if (broker_http_parse(v, &addr, &loopback, herr, sizeof herr) != 0)
                return s_bad("%s", herr);
            cfg.http_address = v;
        } else if (strcmp(a, "--lock-wait") == 0) {
            char *end = NULL;
            errno = 0;
            long s = strtol(v, &end, 10);
            if (errno || !end || *end || end == v || s < 0 || s > 600)
                return s_bad("--lock-wait needs whole seconds from 0 to 600, got '%s'", v);
            cfg.lock_wait_ms = s == 0 ? 1 : (int)(s * 1000); /* 0: do not wait */
        } else if (strcmp(a, "--lifeline-fd") == 0) {
            char lerr[128];
            cfg.lifeline_fd = common_lifeline_open(v, lerr, sizeof lerr);
            if (cfg.lifeline_fd < 0)
                return s_bad("%s", lerr);
        } else if (strcmp(a, "--endpoints-file") == 0) {
            cfg.endpoints_file = v;
        } else if (strcmp(a, "--pid-file") == 0) {
            cfg.pid_file = v;
        } else if (strcmp(a, "--key") == 0) {
            cfg.key_file = v;
        } else if (strcmp(a, "--keys") == 0) {
            cfg.keys_dir = v;
        } else if (strcmp(a, "--config") == 0) {
            config_path = v;
        } else if (strncmp(a, "--max-", 6) == 0) {
            if (s_limit(a, v, &cfg) != 0)
                return s_bad("%s", "a --max-* option needs a whole number within its ceiling "
                                   "(see --help)");
        } else if (strcmp(a, "--cache-entries") == 0) {
            if (s_parse_int(v, 1, LONG_MAX, &n) != 0)
                return s_bad("--cache-entries wants a count of at least 1, not '%s'", v);
            cfg.cache_entries = (uint64_t)n;
        } else if (strcmp(a, "--cache-mb") == 0) {
            if (s_parse_int(v, 1, 1L << 30, &n) != 0)
                return s_bad("--cache-mb wants MiB between 1 and 1073741824, not '%s'", v);
            cfg.cache_bytes = (uint64_t)n << 20;
        } else if (strcmp(a, "--lost-after") == 0 || strcmp(a, "--liveness") == 0) {
            if (s_parse_int(v, 10, 86400000, &n) != 0)
                return s_bad("--lost-after wants milliseconds between 10 and 86400000, not '%s'",
                             v);
            if (strcmp(a, "--liveness") == 0)
                fprintf(stderr, "fitfarm-broker: --liveness is now --lost-after (the old "
                        "spelling works for this release only)\n");
            cfg.liveness_ms = (int)n;
        } else if (strcmp(a, "--heartbeat") == 0) {
            if (s_parse_int(v, 10, 3600000, &n) != 0)
                return s_bad("--heartbeat wants milliseconds between 10 and 3600000, not '%s'",
                             v);
            cfg.heartbeat_ms = (int)n;
        } else if (strcmp(a, "--speculate-after") == 0) {
            char *end = NULL;
            double x = strtod(v, &end);
            if (!*v || *end || !(x >= 1.05 && x <= 1000))
                return s_bad("--speculate-after wants a factor between 1.05 and 1000, not '%s'",
                             v);
            cfg.speculate_after = x;
        } else if (strcmp(a, "--attempts") == 0) {
            if (s_parse_int(v, 1, 1000, &n) != 0)
                return s_bad("--attempts wants a count between 1 and 1000, not '%s'", v);
            cfg.attempts = (unsigned)n;
        }
    }
    if (!cfg.store_dir)
        cfg.store_dir = "fitfarm-store";
    if (!cfg.clients_endpoint)
        return s_bad("%s", "--clients ENDPOINT is required");
    if (!cfg.workers_endpoint)
        return s_bad("%s", "--workers ENDPOINT is required");
    /* Flag beats environment beats config file (common/config.h). */
    common_config_t *file = NULL;
    char cerr[768];
    if (common_config_load(config_path, &file, NULL, 0, cerr, sizeof cerr) != 0)
        return s_bad("%s", cerr);
    if (!cfg.insecure) {
        cfg.key_file = common_config_resolve(cfg.key_file, "FITFARM_KEY", file, "key", NULL);
        cfg.keys_dir =
            common_config_resolve(cfg.keys_dir, "FITFARM_KEYS_DIR", file, "keys_dir", NULL);
    }
    int rc = broker_main_run(&cfg) == 0 ? 0 : 1;
    common_config_destroy(&file); /* resolved strings borrowed from it until here */
    return rc;
}
