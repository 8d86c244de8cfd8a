/* main.c: fitfarm-broker's command line. Parses flags into broker_config_t
 * and calls broker_main_run; nothing else lives here. Usage errors exit 2. */
#include <errno.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "broker.h"

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
            "  --store DIR           durable store folder; accepted, but this version\n"
            "                        keeps results in memory only (durability comes later)\n"
            "  --liveness MS         drop a worker silent this long (default 5000)\n"
            "  --heartbeat MS        heartbeat interval to workers (default 1000)\n"
            "  --attempts N          tries of a job that crashes or times out (default 3)\n"
            "  --endpoints-file FILE write the bound endpoints there as\n"
            "                        \"clients EP\\nworkers EP\\n\" (atomically)\n"
            "  --help                this text\n"
            "  --version             print the version\n"
            "\n"
            "Stops cleanly on SIGTERM or SIGINT. Log level: FITFARM_LOG=debug|info|warn|error.\n");
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

int main(int argc, char **argv)
{
    broker_config_t cfg = {0};
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
        static const char *const with_value[] = {"--clients",  "--workers",  "--store",
                                                 "--liveness", "--heartbeat", "--attempts",
                                                 "--endpoints-file"};
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
        } else if (strcmp(a, "--endpoints-file") == 0) {
            cfg.endpoints_file = v;
        } else if (strcmp(a, "--liveness") == 0) {
            if (s_parse_int(v, 10, 86400000, &n) != 0)
                return s_bad("--liveness wants milliseconds between 10 and 86400000, not '%s'",
                             v);
            cfg.liveness_ms = (int)n;
        } else if (strcmp(a, "--heartbeat") == 0) {
            if (s_parse_int(v, 10, 3600000, &n) != 0)
                return s_bad("--heartbeat wants milliseconds between 10 and 3600000, not '%s'",
                             v);
            cfg.heartbeat_ms = (int)n;
        } else if (strcmp(a, "--attempts") == 0) {
            if (s_parse_int(v, 1, 1000, &n) != 0)
                return s_bad("--attempts wants a count between 1 and 1000, not '%s'", v);
            cfg.attempts = (unsigned)n;
        }
    }
    if (!cfg.clients_endpoint)
        return s_bad("%s", "--clients ENDPOINT is required");
    if (!cfg.workers_endpoint)
        return s_bad("%s", "--workers ENDPOINT is required");
    return broker_main_run(&cfg) == 0 ? 0 : 1;
}
