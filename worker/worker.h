/* worker.h: the worker's single entry point, used by fitfarm-worker's main
 * (and by the tests that run a worker in-process). */
#ifndef WORKER_WORKER_H
#define WORKER_WORKER_H

#include <stddef.h>

#define WORKER_MAX_PLUGIN_DIRS 16
#define WORKER_MAX_EXEC 16

typedef struct {
    const char *broker_endpoint; /* the broker's workers endpoint */
    unsigned slots;              /* child processes; 0 = online CPUs */
    const char *plugin_dirs[WORKER_MAX_PLUGIN_DIRS]; /* NULL-terminated; empty = defaults */
    const char *name;            /* worker name; NULL = "host-pid" */
    int heartbeat_ms;            /* 0 = 1000 */
    int liveness_ms;             /* broker silent this long: re-register; 0 = 5000 */
    unsigned default_timeout_s;  /* per evaluation when the job gives none; 0 = 3600 */
    size_t mem_limit_mb;         /* address-space limit per child; 0 = none */
    /* External programs for the exec plugin: "NAME=COMMAND" entries, NULL-terminated. */
    const char *exec[WORKER_MAX_EXEC];
    /* Security (secure.h), appended: CURVE unless insecure (local endpoints only). */
    const char *key_file;        /* this worker's .secret key file */
    const char *broker_key_file; /* the broker's .public key file */
    int insecure;
    /* With plugin_dirs given: load the default folders too, after them (a
     * folder that is both is loaded once). */
    int with_default_plugins;
    /* Written (atomically, "ready PID\n") once plugins are loaded, children
     * started and HELLO and CREDIT handed to the broker's socket; NULL =
     * nowhere. A starter waits for it to know the worker is up. */
    const char *ready_file;
    /* The read end of the starter's lifeline pipe (common/lifeline.h): at end
     * of file the worker stops at once, as on a second SIGTERM. 0 = none. */
    int lifeline_fd;
    /* Idle harvesting (harvest.h), appended. */
    int nice;           /* added to the children's nice value, 0..19; -1 = the default */
    double max_load;    /* pause above this load from other processes; 0 = no rule */
    int has_hours;      /* take jobs only in [hours_start_s, hours_end_s) local time */
    int hours_start_s, hours_end_s;
    int on_reclaim;     /* WORKER_RECLAIM_*: what a pause does to running evaluations */
    int no_cgroup;      /* 1: no cgroup per slot (cgroup.h), process groups only */
    int no_calibration; /* 1: report speed 0 (not measured) instead of calibrating */
} worker_config_t;

#define WORKER_DEFAULT_NICE 10
enum { WORKER_RECLAIM_FINISH = 0, WORKER_RECLAIM_REQUEUE = 1 };

/* The default plugin directories: the build tree's plugins folder when this
 * executable lives in the build tree, then the plugin folder of the install
 * tree this executable sits in (found from its own path, so an install under
 * any prefix works), then the configured install directory.
 * Fills dirs (up to max, NULL-terminated); returns the count. Borrowed strings. */
size_t worker_default_plugin_dirs(const char **dirs, size_t max);

/* The exec plugin (exec_plugin.h) for one "NAME=COMMAND" spec, for callers
 * outside the worker that evaluate in-process (`fitfarm sim --exec`): probes
 * the program and returns its descriptor in *out (release it with
 * worker_exec_close), or -1 with a sentence in err. Blocks up to 10 s. */
struct fitfarm_plugin;
int worker_exec_open(const char *spec, const struct fitfarm_plugin **out, char *err,
                     size_t errlen);
/* Kills the co-process, frees the descriptor, sets *p to NULL; accepts NULL. */
void worker_exec_close(const struct fitfarm_plugin **p);

/* Runs the worker until SIGTERM/SIGINT. Returns 0 on a clean stop, 1 after
 * logging why it could not start. Blocks; one worker per process. */
int worker_main_run(const worker_config_t *config);

#endif
