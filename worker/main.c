/* main.c: fitfarm-worker's command line. Owns flag parsing and usage text
 * only; everything else is worker_main_run (loop.c). Usage errors exit 2. */
#include <errno.h>
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/config.h"
#include "common/lifeline.h"
#include "common/log.h"
#include "harvest.h"
#include "worker.h"

#ifndef FITFARM_VERSION
#define FITFARM_VERSION "unknown"
#endif

static void s_usage(FILE *out)
{
    fprintf(out,
            "usage: fitfarm-worker --broker ENDPOINT [options]\n"
            "\n"
            "Runs fitness evaluations for a fitfarm broker in pre-forked child processes.\n"
            "\n"
            "  --broker EP         the broker's workers endpoint, e.g. tcp://host:5556 (required)\n"
            "  --slots N           child processes, 1..1024 (default: online CPUs)\n"
            "  --plugin-dir DIR    load plugins from DIR (repeatable; default: the build\n"
            "                      tree's plugins when run from it, then the installed ones)\n"
            "  --with-default-plugins  with --plugin-dir: load the default folders too\n"
            "  --exec NAME=CMD     register external program CMD as plugin NAME (repeatable)\n"
            "  --name NAME         worker name shown by the broker (default: host-pid)\n"
            "  --timeout SECONDS   per evaluation, when a job gives none (default 3600)\n"
            "  --mem-limit MB      address-space limit per child process (default: none)\n"
            "  --heartbeat MS      heartbeat interval (default 1000)\n"
            "  --liveness MS       re-register after the broker is silent this long (default 5000)\n"
            "  --key FILE          this worker's secret key (fitfarm keygen NAME); or\n"
            "                      FITFARM_KEY, or 'key =' in the config file\n"
            "  --broker-key FILE   the broker's public key; or FITFARM_BROKER_KEY, or\n"
            "                      'broker_key =' in the config file\n"
            "  --config FILE       settings file (default $XDG_CONFIG_HOME/fitfarm/config or\n"
            "                      ~/.config/fitfarm/config); flags beat environment beat file;\n"
            "                      --broker may also come from FITFARM_BROKER or 'broker ='\n"
            "  --insecure          plaintext, no keys: only to ipc://, inproc:// or loopback\n"
            "  --ready-file FILE   write \"ready PID\\n\" there (atomically) once plugins are\n"
            "                      loaded, children started and HELLO sent: a starter waits\n"
            "                      for this file to know the worker is up\n"
            "  --lifeline-fd N     descriptor N (3..1023) is the read end of a pipe held open\n"
            "                      by the process that started the worker; at end of file\n"
            "                      (that process died) running evaluations are killed and\n"
            "                      the worker stops\n"
            "\n"
            "Borrowed machines (README: \"Workers on borrowed desktops\"):\n"
            "  --nice N            run evaluations N steps nicer than the worker, 0..19\n"
            "                      (default %d: they only ever yield to other work)\n"
            "  --max-load L        pause while the 1-minute load average minus our own\n"
            "                      running evaluations is above L; resume at 3/4 of L\n"
            "  --hours START-END   take jobs only in this daily window of local time,\n"
            "                      HH:MM-HH:MM (or HH:MM:SS), e.g. 19:00-07:30 past midnight\n"
            "  --on-reclaim finish|requeue\n"
            "                      when a rule pauses the worker: let running evaluations\n"
            "                      finish (default), or stop them at once and hand them\n"
            "                      back to the broker to run elsewhere (same seed); jobs\n"
            "                      not yet started are handed back either way\n"
            "  --no-calibration    skip the speed measurement at start (about 0.1 s); the\n"
            "                      broker then shows speed 0, not measured (the embedded\n"
            "                      pool, one machine, uses this)\n"
            "  --no-cgroup         do not put each slot's processes in a cgroup v2 of\n"
            "                      their own (by default, where this user may create one:\n"
            "                      then nothing a plugin starts outlives the worker, even\n"
            "                      after SIGKILL; the log says whether it could)\n"
            "  --help, --version\n"
            "\n"
            "SIGTERM or SIGINT drains (running evaluations finish, queued jobs go back);\n"
            "a second one stops at once. FITFARM_LOG=debug|info|warn|error sets the log level.\n"
            "FITFARM_TEST_LOADAVG_FILE=FILE (tests only) reads the load from FILE instead of\n"
            "/proc/loadavg.\n",
            WORKER_DEFAULT_NICE);
}

/* Parses a decimal integer in [lo, hi]; exits 2 naming the flag otherwise. */
static unsigned long long s_number(const char *flag, const char *text, unsigned long long lo,
                                   unsigned long long hi)
{
    char *end = NULL;
    errno = 0;
    unsigned long long v = strtoull(text, &end, 10);
    if (errno || !end || *end || end == text || text[0] == '-' || v < lo || v > hi) {
        fprintf(stderr, "fitfarm-worker: %s needs a whole number from %llu to %llu, got \"%s\"\n",
                flag, lo, hi, text);
        exit(2);
    }
    return v;
}

static int s_checked_run(worker_config_t *cfg);

int main(int argc, char **argv)
{
    worker_config_t config;
    memset(&config, 0, sizeof config);
    size_t n_dirs = 0, n_exec = 0;
    enum {
        O_BROKER = 1, O_SLOTS, O_DIR, O_NAME, O_EXEC, O_TIMEOUT, O_MEM, O_HB, O_LIVE,
        O_KEY, O_BROKER_KEY, O_CONFIG, O_INSECURE, O_WITH_DEFAULTS, O_READY, O_LIFELINE,
        O_NICE, O_MAX_LOAD, O_HOURS, O_ON_RECLAIM, O_NO_CGROUP, O_NO_CALIBRATION
    };
    config.nice = -1;
    const char *config_path = NULL;
    static const struct option options[] = {
        {"broker", required_argument, NULL, O_BROKER},
        {"slots", required_argument, NULL, O_SLOTS},
        {"plugin-dir", required_argument, NULL, O_DIR},
        {"name", required_argument, NULL, O_NAME},
        {"exec", required_argument, NULL, O_EXEC},
        {"timeout", required_argument, NULL, O_TIMEOUT},
        {"mem-limit", required_argument, NULL, O_MEM},
        {"heartbeat", required_argument, NULL, O_HB},
        {"liveness", required_argument, NULL, O_LIVE},
        {"key", required_argument, NULL, O_KEY},
        {"broker-key", required_argument, NULL, O_BROKER_KEY},
        {"config", required_argument, NULL, O_CONFIG},
        {"insecure", no_argument, NULL, O_INSECURE},
        {"with-default-plugins", no_argument, NULL, O_WITH_DEFAULTS},
        {"ready-file", required_argument, NULL, O_READY},
        {"lifeline-fd", required_argument, NULL, O_LIFELINE},
        {"nice", required_argument, NULL, O_NICE},
        {"max-load", required_argument, NULL, O_MAX_LOAD},
        {"hours", required_argument, NULL, O_HOURS},
        {"on-reclaim", required_argument, NULL, O_ON_RECLAIM},
        {"no-cgroup", no_argument, NULL, O_NO_CGROUP},
        {"no-calibration", no_argument, NULL, O_NO_CALIBRATION},
        {"help", no_argument, NULL, 'h'},
        {"version", no_argument, NULL, 'V'},
        {NULL, 0, NULL, 0},
    };
    int opt;
    opterr = 0;
    while ((opt = getopt_long(argc, argv, "hV", options, NULL)) != -1) {
        switch (opt) {
        case O_BROKER:
            config.broker_endpoint = optarg;
            break;
        case O_SLOTS:
            config.slots = (unsigned)s_number("--slots", optarg, 1, 1024);
            break;
        case O_DIR:
            if (n_dirs == WORKER_MAX_PLUGIN_DIRS) {
                fprintf(stderr, "fitfarm-worker: at most %d --plugin-dir\n",
                        WORKER_MAX_PLUGIN_DIRS);
                return 2;
            }
            config.plugin_dirs[n_dirs++] = optarg;
            break;
        case O_NAME:
            if (!optarg[0] || strlen(optarg) >= 128) {
                fprintf(stderr, "fitfarm-worker: --name must be 1 to 127 bytes\n");
                return 2;
            }
            config.name = optarg;
            break;
        case O_EXEC:
            if (n_exec == WORKER_MAX_EXEC) {
                fprintf(stderr, "fitfarm-worker: at most %d --exec\n", WORKER_MAX_EXEC);
                return 2;
            }
            if (!strchr(optarg, '=') || optarg[0] == '=') {
                fprintf(stderr, "fitfarm-worker: --exec needs NAME=COMMAND, got \"%s\"\n",
                        optarg);
                return 2;
            }
            config.exec[n_exec++] = optarg;
            break;
        case O_TIMEOUT:
            config.default_timeout_s = (unsigned)s_number("--timeout", optarg, 1, 30u * 86400u);
            break;
        case O_MEM:
            config.mem_limit_mb = (size_t)s_number("--mem-limit", optarg, 16, 1u << 30);
            break;
        case O_HB:
            config.heartbeat_ms = (int)s_number("--heartbeat", optarg, 10, 600000);
            break;
        case O_LIVE:
            config.liveness_ms = (int)s_number("--liveness", optarg, 100, 3600000);
            break;
        case O_KEY:
            config.key_file = optarg;
            break;
        case O_BROKER_KEY:
            config.broker_key_file = optarg;
            break;
        case O_CONFIG:
            config_path = optarg;
            break;
        case O_NO_CALIBRATION:
            config.no_calibration = 1;
            break;
        case O_NO_CGROUP:
            config.no_cgroup = 1;
            break;
        case O_INSECURE:
            config.insecure = 1;
            break;
        case O_WITH_DEFAULTS:
            config.with_default_plugins = 1;
            break;
        case O_READY:
            config.ready_file = optarg;
            break;
        case O_LIFELINE: {
            char lerr[128];
            config.lifeline_fd = common_lifeline_open(optarg, lerr, sizeof lerr);
            if (config.lifeline_fd < 0) {
                fprintf(stderr, "fitfarm-worker: %s\n", lerr);
                return 2;
            }
            break;
        }
        case O_NICE:
            config.nice = (int)s_number("--nice", optarg, 0, 19);
            break;
        case O_MAX_LOAD: {
            char herr[256];
            if (worker_harvest_parse_load(optarg, &config.max_load, herr, sizeof herr) != 0) {
                fprintf(stderr, "fitfarm-worker: %s\n", herr);
                return 2;
            }
            break;
        }
        case O_HOURS: {
            char herr[256];
            if (worker_harvest_parse_hours(optarg, &config.hours_start_s, &config.hours_end_s,
                                           herr, sizeof herr) != 0) {
                fprintf(stderr, "fitfarm-worker: %s\n", herr);
                return 2;
            }
            config.has_hours = 1;
            break;
        }
        case O_ON_RECLAIM:
            if (strcmp(optarg, "finish") == 0) {
                config.on_reclaim = WORKER_RECLAIM_FINISH;
            } else if (strcmp(optarg, "requeue") == 0) {
                config.on_reclaim = WORKER_RECLAIM_REQUEUE;
            } else {
                fprintf(stderr, "fitfarm-worker: --on-reclaim needs finish or requeue, got "
                                "\"%s\"\n", optarg);
                return 2;
            }
            break;
        case 'h':
            s_usage(stdout);
            return 0;
        case 'V':
            printf("fitfarm-worker %s\n", FITFARM_VERSION);
            return 0;
        default:
            if (optopt && optopt < O_BROKER)
                fprintf(stderr, "fitfarm-worker: unknown option -%c\n", optopt);
            else if (optopt)
                fprintf(stderr, "fitfarm-worker: %s needs a value\n", argv[optind - 1]);
            else
                fprintf(stderr, "fitfarm-worker: unknown option %s\n", argv[optind - 1]);
            fprintf(stderr, "try fitfarm-worker --help\n");
            return 2;
        }
    }
    if (optind < argc) {
        fprintf(stderr, "fitfarm-worker: unexpected argument \"%s\"\ntry fitfarm-worker --help\n",
                argv[optind]);
        return 2;
    }
    /* Flag beats environment beats config file (common/config.h). */
    common_config_t *file = NULL;
    char cerr[768];
    if (common_config_load(config_path, &file, NULL, 0, cerr, sizeof cerr) != 0) {
        fprintf(stderr, "fitfarm-worker: %s\n", cerr);
        return 2;
    }
    config.broker_endpoint =
        common_config_resolve(config.broker_endpoint, "FITFARM_BROKER", file, "broker", NULL);
    if (!config.insecure) {
        config.key_file = common_config_resolve(config.key_file, "FITFARM_KEY", file, "key", NULL);
        config.broker_key_file = common_config_resolve(config.broker_key_file,
                                                       "FITFARM_BROKER_KEY", file, "broker_key",
                                                       NULL);
    }
    int rc = s_checked_run(&config);
    common_config_destroy(&file); /* resolved strings borrowed from it until here */
    return rc;
}

/* The checks that need the resolved settings, then the worker. */
static int s_checked_run(worker_config_t *cfg)
{
    worker_config_t config = *cfg;
    if (!config.broker_endpoint || !config.broker_endpoint[0]) {
        fprintf(stderr, "fitfarm-worker: --broker ENDPOINT is required\n"
                        "try fitfarm-worker --help\n");
        return 2;
    }
    if (config.liveness_ms && config.heartbeat_ms && config.liveness_ms <= config.heartbeat_ms) {
        fprintf(stderr, "fitfarm-worker: --liveness must be longer than --heartbeat\n");
        return 2;
    }
    common_log_set_tag("worker");
    return worker_main_run(&config) == 0 ? 0 : 1;
}
