/* pool.c: the embedded local pool (see pool.h). Owns the two child processes
 * and their temporary folder: creating them, noticing one died, and ending
 * them by PID so nothing outlives the client. Not here: talking to them.
 *
 * Why fork and not threads: the broker and worker cores are one-per-process
 * daemons with their own signal handling; a child also keeps a crashing plugin
 * or a broker bug out of the optimizer's process. Why fork before any ZeroMQ
 * context exists in the parent: a forked child must not inherit a context whose
 * I/O threads it does not have. */
#include "pool.h"

#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/prctl.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "broker/broker.h"
#include "client/include/fitfarm.h"
#include "common/log.h"
#include "worker/worker.h"

#define POOL_STOP_MS 5000

struct client_pool {
    char dir[256];
    char clients_ep[300];
    char workers_ep[300];
    pid_t broker_pid;
    pid_t worker_pid;
};

/* In a fresh child: die with the parent, detach from the caller's stdin and
 * stdout (a reader waiting for EOF on the CLI's stdout must not wait for us),
 * and undo signal state the caller may have set. Returns only if the parent
 * still lives. */
static void s_child_setup(pid_t parent)
{
    if (prctl(PR_SET_PDEATHSIG, SIGTERM) != 0)
        _exit(1);
    /* The parent may have died between fork and prctl: then nobody will send
     * the death signal. */
    if (getppid() != parent)
        _exit(1);
    sigset_t none;
    sigemptyset(&none);
    sigprocmask(SIG_SETMASK, &none, NULL);
    signal(SIGPIPE, SIG_IGN);
    int fd = open("/dev/null", O_RDWR);
    if (fd >= 0) {
        dup2(fd, STDIN_FILENO);
        dup2(fd, STDOUT_FILENO);
        if (fd > STDERR_FILENO)
            close(fd);
    }
    /* The daemons log on stderr; in an embedded pool only problems matter,
     * unless the user asked for more. */
    if (!getenv("FITFARM_LOG"))
        common_log_set_level(COMMON_LOG_WARN);
}

static void s_run_broker(const client_pool_t *self, const char *store_dir)
{
    broker_config_t config;
    memset(&config, 0, sizeof config);
    config.clients_endpoint = self->clients_ep;
    config.workers_endpoint = self->workers_ep;
    /* A private store in the pool's temporary folder (removed with it) unless
     * the caller named one to keep. */
    char private_store[300];
    if (!store_dir) {
        snprintf(private_store, sizeof private_store, "%s/store", self->dir);
        store_dir = private_store;
        config.scratch_store = 1; /* removed with the folder: fsync buys nothing */
    }
    config.store_dir = store_dir;
    config.insecure = 1; /* ipc:// in a private 0700 folder: no keys needed */
    common_log_set_tag("pool broker");
    _exit(broker_main_run(&config) == 0 ? 0 : 1);
}

static void s_run_worker(const client_pool_t *self, unsigned slots, const char *plugin_dir)
{
    worker_config_t config;
    memset(&config, 0, sizeof config);
    config.broker_endpoint = self->workers_ep;
    config.insecure = 1;
    config.slots = slots;
    size_t n = 0;
    if (plugin_dir)
        config.plugin_dirs[n++] = plugin_dir;
    const char *defaults[WORKER_MAX_PLUGIN_DIRS];
    size_t nd = worker_default_plugin_dirs(defaults, WORKER_MAX_PLUGIN_DIRS);
    /* A default folder that does not exist (nothing installed yet) is not
     * worth a warning on every run of the CLI. */
    struct stat st, extra;
    int have_extra = plugin_dir && stat(plugin_dir, &extra) == 0;
    for (size_t i = 0; i < nd && n + 1 < WORKER_MAX_PLUGIN_DIRS; i++) {
        if (!defaults[i] || stat(defaults[i], &st) != 0 || !S_ISDIR(st.st_mode))
            continue;
        /* The caller's folder may be a default one too: load it once. */
        if (have_extra && st.st_dev == extra.st_dev && st.st_ino == extra.st_ino)
            continue;
        config.plugin_dirs[n++] = defaults[i];
    }
    config.plugin_dirs[n] = NULL;
    common_log_set_tag("pool worker");
    _exit(worker_main_run(&config) == 0 ? 0 : 1);
}

static void s_remove_dir(const char *dir)
{
    DIR *d = opendir(dir);
    if (d) {
        struct dirent *e;
        while ((e = readdir(d)) != NULL) {
            if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0)
                continue;
            char path[600];
            snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
            struct stat st;
            if (lstat(path, &st) == 0 && S_ISDIR(st.st_mode))
                s_remove_dir(path);
            else
                unlink(path);
        }
        closedir(d);
    }
    rmdir(dir);
}

static pid_t s_spawn(client_pool_t *self, int which, unsigned slots, const char *plugin_dir,
                     const char *store_dir)
{
    pid_t parent = getpid();
    /* Flush so the child does not write the parent's buffered output twice. */
    fflush(NULL);
    pid_t pid = fork();
    if (pid != 0)
        return pid;
    s_child_setup(parent);
    if (which == 0)
        s_run_broker(self, store_dir);
    else
        s_run_worker(self, slots, plugin_dir);
    _exit(1);
}

int client_pool_new(unsigned slots, const char *plugin_dir, const char *store_dir,
                    client_pool_t **out, char *err, size_t errlen)
{
    int rc = FITFARM_OK;
    *out = NULL;
    client_pool_t *self = calloc(1, sizeof *self);
    if (!self) {
        snprintf(err, errlen, "out of memory starting the embedded pool");
        return FITFARM_ENOMEM;
    }
    self->broker_pid = -1;
    self->worker_pid = -1;
    const char *tmp = getenv("TMPDIR");
    if (!tmp || !*tmp || strlen(tmp) > 80)
        tmp = "/tmp";
    snprintf(self->dir, sizeof self->dir, "%s/fitfarm-pool-XXXXXX", tmp);
    if (!mkdtemp(self->dir)) {
        snprintf(err, errlen, "cannot create the embedded pool's folder under %s: %s", tmp,
                 strerror(errno));
        self->dir[0] = '\0';
        rc = FITFARM_ESYSTEM;
        goto cleanup;
    }
    snprintf(self->clients_ep, sizeof self->clients_ep, "ipc://%s/clients", self->dir);
    snprintf(self->workers_ep, sizeof self->workers_ep, "ipc://%s/workers", self->dir);

    self->broker_pid = s_spawn(self, 0, slots, plugin_dir, store_dir);
    if (self->broker_pid < 0) {
        snprintf(err, errlen, "cannot fork the embedded broker: %s", strerror(errno));
        rc = FITFARM_ESYSTEM;
        goto cleanup;
    }
    self->worker_pid = s_spawn(self, 1, slots, plugin_dir, store_dir);
    if (self->worker_pid < 0) {
        snprintf(err, errlen, "cannot fork the embedded worker: %s", strerror(errno));
        rc = FITFARM_ESYSTEM;
        goto cleanup;
    }
    *out = self;
    self = NULL;
cleanup:
    client_pool_destroy(&self);
    return rc;
}

const char *client_pool_endpoint(const client_pool_t *self)
{
    return self->clients_ep;
}

static int s_check_one(pid_t *pid, const char *what, char *err, size_t errlen)
{
    if (*pid <= 0)
        return 0;
    int status = 0;
    pid_t r = waitpid(*pid, &status, WNOHANG);
    if (r != *pid)
        return 0;
    *pid = -1;
    if (WIFEXITED(status))
        snprintf(err, errlen, "the embedded %s exited with status %d (its log is on stderr)",
                 what, WEXITSTATUS(status));
    else if (WIFSIGNALED(status))
        snprintf(err, errlen, "the embedded %s was killed by signal %d", what, WTERMSIG(status));
    else
        snprintf(err, errlen, "the embedded %s ended", what);
    return FITFARM_ECONNECT;
}

int client_pool_check(client_pool_t *self, char *err, size_t errlen)
{
    int rc = s_check_one(&self->broker_pid, "broker", err, errlen);
    if (rc == 0)
        rc = s_check_one(&self->worker_pid, "worker", err, errlen);
    return rc;
}

static int64_t s_now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

/* Reaps pid if it ended; returns 1 when it is gone. */
static int s_reaped(pid_t *pid)
{
    if (*pid <= 0)
        return 1;
    int status;
    pid_t r = waitpid(*pid, &status, WNOHANG);
    if (r == *pid || (r < 0 && errno == ECHILD)) {
        *pid = -1;
        return 1;
    }
    return 0;
}

void client_pool_destroy(client_pool_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    client_pool_t *self = *self_p;
    /* The worker first: it says BYE to a broker that is still there. */
    if (self->worker_pid > 0)
        kill(self->worker_pid, SIGTERM);
    if (self->broker_pid > 0)
        kill(self->broker_pid, SIGTERM);
    int64_t deadline = s_now_ms() + POOL_STOP_MS;
    while (!(s_reaped(&self->worker_pid) & s_reaped(&self->broker_pid))) {
        if (s_now_ms() >= deadline) {
            if (self->worker_pid > 0)
                kill(self->worker_pid, SIGKILL);
            if (self->broker_pid > 0)
                kill(self->broker_pid, SIGKILL);
            if (self->worker_pid > 0)
                waitpid(self->worker_pid, NULL, 0);
            if (self->broker_pid > 0)
                waitpid(self->broker_pid, NULL, 0);
            self->worker_pid = self->broker_pid = -1;
            break;
        }
        struct timespec nap = {0, 10 * 1000 * 1000};
        nanosleep(&nap, NULL);
    }
    if (self->dir[0])
        s_remove_dir(self->dir);
    free(self);
    *self_p = NULL;
}

void client_pool_pids(const client_pool_t *self, pid_t *broker, pid_t *worker, const char **dir)
{
    if (broker)
        *broker = self ? self->broker_pid : -1;
    if (worker)
        *worker = self ? self->worker_pid : -1;
    if (dir)
        *dir = self ? self->dir : NULL;
}
