/* pool.c: the embedded local pool (see pool.h). Owns the two child processes,
 * their private folder and the lifeline pipe: starting them, waiting until
 * they are ready, noticing one died, ending them by PID so nothing outlives
 * the client, and removing folders that a killed client left behind. Not
 * here: talking to them (client.c), finding the programs (programs.c).
 *
 * The folder (0700, under $TMPDIR or /tmp) holds:
 *   clients, workers   the broker's ipc:// sockets
 *   store/             the private store, unless options->store_dir is set
 *   endpoints          written by the broker once it listens (--endpoints-file)
 *   worker.ready       written by the worker once it said HELLO (--ready-file)
 *   pids               "broker PID\nworker PID\n", for the stale-folder check
 *   lock               flock()ed by this process while the pool exists
 *
 * Why programs and posix_spawn, not fork: forking a threaded host (a Python
 * interpreter) copies one thread and whatever locks the others held; spawn
 * runs exec at once. It also keeps SQLite, dlopen and the plugins out of the
 * library. Why a lifeline pipe, not PR_SET_PDEATHSIG: the death signal is
 * tied to the thread that started the child, and in a threaded host that
 * thread may end long before the process. The pipe's write end is close-on-
 * exec here, so other programs the host spawns do not hold it; each daemon
 * gets the read end as descriptor S_LIFELINE_FD and stops when it reads end
 * of file, which the kernel delivers when this process dies however it dies. */
#include "pool.h"

#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <signal.h>
#include <spawn.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "programs.h"

extern char **environ;

#define POOL_STOP_MS 5000
#define POOL_DEFAULT_START_MS 10000
#define POOL_READY_FILE_MAX 4096 /* the ready files we read are a few lines */
#define POOL_STALE_AGE_S 10      /* a folder younger than this may be starting */
#define POOL_MAX_ARGS 64
#define S_LIFELINE_FD 3 /* where each daemon finds the read end */
#define S_LIFELINE_FD_TEXT "3"
#define S_PREFIX "fitfarm-pool-"

struct client_pool {
    char dir[256];
    char clients_ep[300];
    char workers_ep[300];
    pid_t broker_pid;
    pid_t worker_pid;
    int lifeline_w; /* write end, close-on-exec; -1 once closed */
    int lock_fd;    /* flock on DIR/lock while we live; close-on-exec */
    int scratch;    /* the store is the folder's own, removed with it */
};

static _Atomic(client_pool_t *) s_last; /* the test hook's pool */

static int64_t s_now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

static void s_nap_ms(long ms)
{
    struct timespec nap = {ms / 1000, (ms % 1000) * 1000000L};
    nanosleep(&nap, NULL);
}

static void s_remove_dir(const char *dir)
{
    DIR *d = opendir(dir);
    if (d) {
        struct dirent *e;
        while ((e = readdir(d)) != NULL) {
            if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0)
                continue;
            char path[CLIENT_PATH_MAX];
            if (snprintf(path, sizeof path, "%s/%s", dir, e->d_name) >= (int)sizeof path)
                continue;
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

/* Reads a small file whole: at most POOL_READY_FILE_MAX - 1 bytes, NUL-ended.
 * Returns its length, or -1 when it is missing, unreadable or too long. */
static long s_read_small(const char *path, char *buf)
{
    int fd = open(path, O_RDONLY | O_CLOEXEC | O_NOFOLLOW);
    if (fd < 0)
        return -1;
    long len = 0;
    for (;;) {
        ssize_t n = read(fd, buf + len, (size_t)(POOL_READY_FILE_MAX - 1 - len));
        if (n < 0 && errno == EINTR)
            continue;
        if (n <= 0)
            break;
        len += n;
        if (len == POOL_READY_FILE_MAX - 1) {
            len = -1; /* longer than anything we write: not ours */
            break;
        }
    }
    close(fd);
    if (len >= 0)
        buf[len] = '\0';
    return len;
}

/* A pid from "name PID\n" at the start of text; 0 when it is not there. */
static pid_t s_parse_pid(const char *text, const char *name)
{
    size_t nlen = strlen(name);
    if (strncmp(text, name, nlen) != 0 || text[nlen] != ' ')
        return 0;
    char *end = NULL;
    errno = 0;
    long v = strtol(text + nlen + 1, &end, 10);
    if (errno || !end || *end != '\n' || v <= 1 || v > INT_MAX)
        return 0;
    return (pid_t)v;
}

static int s_alive(pid_t pid)
{
    return pid > 0 && (kill(pid, 0) == 0 || errno == EPERM);
}

/* A folder left by a killed client: ours, 0700, its lock file old and not
 * held (flock dies with the process that took it), and neither daemon it
 * recorded still running (they stop within seconds of their lifeline
 * closing). Any doubt keeps the folder. */
static int s_is_stale(const char *dir)
{
    struct stat st;
    if (lstat(dir, &st) != 0 || !S_ISDIR(st.st_mode) || st.st_uid != getuid() ||
        (st.st_mode & 0777) != 0700)
        return 0;
    char path[CLIENT_PATH_MAX + 16];
    snprintf(path, sizeof path, "%s/lock", dir);
    int fd = open(path, O_RDONLY | O_CLOEXEC | O_NOFOLLOW);
    if (fd < 0)
        return 0;
    int stale = 0;
    struct stat lst;
    if (fstat(fd, &lst) != 0 || !S_ISREG(lst.st_mode) ||
        time(NULL) - lst.st_mtime < POOL_STALE_AGE_S || flock(fd, LOCK_EX | LOCK_NB) != 0)
        goto cleanup;
    char text[POOL_READY_FILE_MAX];
    snprintf(path, sizeof path, "%s/pids", dir);
    if (s_read_small(path, text) > 0) {
        pid_t broker = s_parse_pid(text, "broker");
        const char *nl = strchr(text, '\n');
        pid_t worker = nl ? s_parse_pid(nl + 1, "worker") : 0;
        if (s_alive(broker) || s_alive(worker))
            goto cleanup;
    }
    stale = 1;
cleanup:
    close(fd); /* releases the lock we may have taken */
    return stale;
}

static void s_remove_stale(const char *tmp)
{
    DIR *d = opendir(tmp);
    if (!d)
        return;
    struct dirent *e;
    /* Bounded: a crowded /tmp costs one scan, not a long walk per start. */
    for (int seen = 0; (e = readdir(d)) != NULL && seen < 100000; seen++) {
        if (strncmp(e->d_name, S_PREFIX, strlen(S_PREFIX)) != 0 || strlen(e->d_name) > 64)
            continue;
        char dir[CLIENT_PATH_MAX];
        if (snprintf(dir, sizeof dir, "%s/%s", tmp, e->d_name) >= (int)sizeof dir)
            continue;
        if (s_is_stale(dir))
            s_remove_dir(dir);
    }
    closedir(d);
}

/* The daemons' environment: ours, plus FITFARM_LOG=warn unless the user set a
 * level (an embedded pool speaks only of problems). Caller frees the array
 * (not the strings, which are borrowed from environ). */
static char **s_child_env(void)
{
    size_t n = 0;
    int has_log = 0;
    for (char **e = environ; e && *e; e++, n++)
        has_log |= strncmp(*e, "FITFARM_LOG=", 12) == 0;
    char **env = calloc(n + 2, sizeof *env);
    if (!env)
        return NULL;
    for (size_t i = 0; i < n; i++)
        env[i] = environ[i];
    if (!has_log)
        env[n++] = "FITFARM_LOG=warn";
    env[n] = NULL;
    return env;
}

/* Spawns path with argv: stdin and stdout on /dev/null (a reader waiting for
 * EOF on the host's stdout must not wait for us), stderr shared (the daemons'
 * log), the lifeline on S_LIFELINE_FD, every other descriptor closed, default
 * signal dispositions and an empty mask whatever the host set. */
static int s_spawn(const client_pool_t *self, int lifeline_r, const char *path, char **argv,
                   pid_t *pid, char *err, size_t errlen)
{
    int rc = FITFARM_ESYSTEM;
    posix_spawn_file_actions_t fa;
    posix_spawnattr_t attr;
    char **env = s_child_env();
    int have_fa = posix_spawn_file_actions_init(&fa) == 0;
    int have_attr = posix_spawnattr_init(&attr) == 0;
    if (!env || !have_fa || !have_attr) {
        snprintf(err, errlen, "out of memory starting %s", path);
        rc = FITFARM_ENOMEM;
        goto cleanup;
    }
    sigset_t none, all;
    sigemptyset(&none);
    sigfillset(&all);
    sigdelset(&all, SIGKILL);
    sigdelset(&all, SIGSTOP);
    int e = posix_spawn_file_actions_addopen(&fa, STDIN_FILENO, "/dev/null", O_RDONLY, 0);
    if (!e)
        e = posix_spawn_file_actions_addopen(&fa, STDOUT_FILENO, "/dev/null", O_WRONLY, 0);
    if (!e)
        e = posix_spawn_file_actions_adddup2(&fa, lifeline_r, S_LIFELINE_FD);
    if (!e)
        e = posix_spawn_file_actions_addclosefrom_np(&fa, S_LIFELINE_FD + 1);
    if (!e)
        e = posix_spawnattr_setsigmask(&attr, &none);
    if (!e)
        e = posix_spawnattr_setsigdefault(&attr, &all);
    if (!e)
        e = posix_spawnattr_setflags(&attr, POSIX_SPAWN_SETSIGMASK | POSIX_SPAWN_SETSIGDEF);
    if (!e)
        e = posix_spawn(pid, path, &fa, &attr, argv, env);
    if (e) {
        snprintf(err, errlen, "cannot start %s for the embedded pool in %s: %s", path,
                 self->dir, strerror(e));
        goto cleanup;
    }
    rc = FITFARM_OK;
cleanup:
    if (have_fa)
        posix_spawn_file_actions_destroy(&fa);
    if (have_attr)
        posix_spawnattr_destroy(&attr);
    free(env);
    return rc;
}

static void s_describe_end(int status, const char *what, const char *when, char *err,
                           size_t errlen)
{
    if (WIFEXITED(status))
        snprintf(err, errlen, "the embedded %s exited with status %d%s (its log is on stderr; "
                 "FITFARM_LOG=info shows more)", what, WEXITSTATUS(status), when);
    else if (WIFSIGNALED(status))
        snprintf(err, errlen, "the embedded %s was killed by signal %d%s", what,
                 WTERMSIG(status), when);
    else
        snprintf(err, errlen, "the embedded %s ended%s", what, when);
}

/* Waits until path holds exactly want, bounded by deadline; fails early when
 * the child that should write it ends. */
static int s_wait_ready(pid_t *pid, const char *what, const char *path, const char *want,
                        int64_t deadline, int timeout_ms, char *err, size_t errlen)
{
    char text[POOL_READY_FILE_MAX];
    long nap = 1;
    for (;;) {
        long len = s_read_small(path, text);
        if (len >= 0) {
            if (strcmp(text, want) == 0)
                return FITFARM_OK;
            /* Renamed into place whole, so anything else is not our child's. */
            snprintf(err, errlen, "the embedded %s's ready file %s does not say what it "
                     "should (\"%.100s\")", what, path, text);
            return FITFARM_ECONNECT;
        }
        int status = 0;
        if (waitpid(*pid, &status, WNOHANG) == *pid) {
            *pid = -1;
            s_describe_end(status, what, " before it was ready", err, errlen);
            return FITFARM_ECONNECT;
        }
        if (s_now_ms() >= deadline) {
            snprintf(err, errlen, "the embedded %s was not ready within %d ms (no %s)", what,
                     timeout_ms, path);
            return FITFARM_ETIMEDOUT;
        }
        s_nap_ms(nap);
        if (nap < 8) /* quick at first: a start takes tens of milliseconds */
            nap *= 2;
    }
}

static int s_write_pids(const client_pool_t *self)
{
    char path[CLIENT_PATH_MAX], tmp[CLIENT_PATH_MAX];
    snprintf(path, sizeof path, "%s/pids", self->dir);
    snprintf(tmp, sizeof tmp, "%s/pids.tmp", self->dir);
    FILE *f = fopen(tmp, "we");
    if (!f)
        return -1;
    int ok = fprintf(f, "broker %ld\nworker %ld\n", (long)self->broker_pid,
                     (long)self->worker_pid) > 0;
    ok &= fclose(f) == 0;
    return ok && rename(tmp, path) == 0 ? 0 : -1;
}

int client_pool_new(const fitfarm_options_t *options, client_pool_t **out, char *err,
                    size_t errlen)
{
    int rc = FITFARM_OK;
    int lifeline_r = -1;
    *out = NULL;
    char broker_prog[CLIENT_PATH_MAX], worker_prog[CLIENT_PATH_MAX];
    client_pool_t *self = calloc(1, sizeof *self);
    if (!self) {
        snprintf(err, errlen, "out of memory starting the embedded pool");
        return FITFARM_ENOMEM;
    }
    self->broker_pid = self->worker_pid = -1;
    self->lifeline_w = self->lock_fd = -1;
    int timeout_ms =
        options->connect_timeout_ms > 0 ? options->connect_timeout_ms : POOL_DEFAULT_START_MS;
    int64_t deadline = s_now_ms() + timeout_ms;

    rc = client_programs_find(options->programs_dir, broker_prog, sizeof broker_prog,
                              worker_prog, sizeof worker_prog, err, errlen);
    if (rc != FITFARM_OK)
        goto cleanup;
    const char *tmp = getenv("TMPDIR");
    /* ipc:// paths are capped near 107 bytes by the socket address. */
    if (!tmp || !*tmp || strlen(tmp) > 80)
        tmp = "/tmp";
    s_remove_stale(tmp);
    snprintf(self->dir, sizeof self->dir, "%s/" S_PREFIX "XXXXXX", tmp);
    if (!mkdtemp(self->dir)) { /* mode 0700 */
        snprintf(err, errlen, "cannot create the embedded pool's folder under %s: %s", tmp,
                 strerror(errno));
        self->dir[0] = '\0';
        rc = FITFARM_ESYSTEM;
        goto cleanup;
    }
    char path[CLIENT_PATH_MAX];
    snprintf(path, sizeof path, "%s/lock", self->dir);
    self->lock_fd = open(path, O_RDWR | O_CREAT | O_EXCL | O_CLOEXEC | O_NOFOLLOW, 0600);
    if (self->lock_fd < 0 || flock(self->lock_fd, LOCK_EX | LOCK_NB) != 0) {
        snprintf(err, errlen, "cannot lock the embedded pool's folder %s: %s", self->dir,
                 strerror(errno));
        rc = FITFARM_ESYSTEM;
        goto cleanup;
    }
    int fds[2];
    if (pipe2(fds, O_CLOEXEC) != 0) {
        snprintf(err, errlen, "cannot make the embedded pool's lifeline: %s", strerror(errno));
        rc = FITFARM_ESYSTEM;
        goto cleanup;
    }
    self->lifeline_w = fds[1];
    self->scratch = options->store_dir == NULL;
    /* Above the fixed child descriptor, so dup2 in the child really copies
     * it (and drops close-on-exec on the copy). */
    lifeline_r = fcntl(fds[0], F_DUPFD_CLOEXEC, S_LIFELINE_FD + 1);
    close(fds[0]);
    if (lifeline_r < 0) {
        snprintf(err, errlen, "cannot make the embedded pool's lifeline: %s", strerror(errno));
        rc = FITFARM_ESYSTEM;
        goto cleanup;
    }
    snprintf(self->clients_ep, sizeof self->clients_ep, "ipc://%s/clients", self->dir);
    snprintf(self->workers_ep, sizeof self->workers_ep, "ipc://%s/workers", self->dir);

    /* The broker first, and the worker only once it listens: a worker that
     * connected to a missing ipc path would retry only after ZeroMQ's
     * reconnect interval. */
    char store[CLIENT_PATH_MAX], endpoints[CLIENT_PATH_MAX], ready[CLIENT_PATH_MAX], want[POOL_READY_FILE_MAX];
    snprintf(store, sizeof store, "%s/store", self->dir);
    snprintf(endpoints, sizeof endpoints, "%s/endpoints", self->dir);
    snprintf(ready, sizeof ready, "%s/worker.ready", self->dir);
    char *bargv[] = {broker_prog, "--clients", self->clients_ep, "--workers", self->workers_ep,
                     "--store", options->store_dir ? (char *)options->store_dir : store,
                     "--insecure", "--endpoints-file", endpoints,
                     "--lifeline-fd", S_LIFELINE_FD_TEXT,
                     /* The private store goes with the folder: fsync buys nothing. */
                     options->store_dir ? NULL : "--scratch-store", NULL};
    rc = s_spawn(self, lifeline_r, broker_prog, bargv, &self->broker_pid, err, errlen);
    if (rc != FITFARM_OK)
        goto cleanup;
    snprintf(want, sizeof want, "clients %s\nworkers %s\n", self->clients_ep, self->workers_ep);
    rc = s_wait_ready(&self->broker_pid, "broker", endpoints, want, deadline, timeout_ms, err,
                      errlen);
    if (rc != FITFARM_OK)
        goto cleanup;

    char *wargv[POOL_MAX_ARGS];
    char slots[16];
    size_t n = 0;
    wargv[n++] = worker_prog;
    wargv[n++] = "--broker";
    wargv[n++] = self->workers_ep;
    wargv[n++] = "--insecure";
    wargv[n++] = "--ready-file";
    wargv[n++] = ready;
    wargv[n++] = "--lifeline-fd";
    wargv[n++] = S_LIFELINE_FD_TEXT;
    /* One machine: a speed score compares nothing, and measuring it was
     * most of the pool's start (75-127 ms of about 150). */
    wargv[n++] = "--no-calibration";
    if (options->slots) {
        snprintf(slots, sizeof slots, "%u", options->slots);
        wargv[n++] = "--slots";
        wargv[n++] = slots;
    }
    if (options->plugin_dir) {
        wargv[n++] = "--plugin-dir";
        wargv[n++] = (char *)options->plugin_dir;
        wargv[n++] = "--with-default-plugins";
    }
    for (size_t i = 0; options->exec_plugins && options->exec_plugins[i]; i++) {
        if (n + 3 > POOL_MAX_ARGS) {
            snprintf(err, errlen, "too many exec plugins for the embedded pool (at most %d)",
                     (POOL_MAX_ARGS - 16) / 2);
            rc = FITFARM_EINVAL;
            goto cleanup;
        }
        wargv[n++] = "--exec";
        wargv[n++] = (char *)options->exec_plugins[i];
    }
    wargv[n] = NULL;
    rc = s_spawn(self, lifeline_r, worker_prog, wargv, &self->worker_pid, err, errlen);
    if (rc != FITFARM_OK)
        goto cleanup;
    if (s_write_pids(self) != 0) {
        snprintf(err, errlen, "cannot write %s/pids: %s", self->dir, strerror(errno));
        rc = FITFARM_ESYSTEM;
        goto cleanup;
    }
    snprintf(want, sizeof want, "ready %ld\n", (long)self->worker_pid);
    rc = s_wait_ready(&self->worker_pid, "worker", ready, want, deadline, timeout_ms, err,
                      errlen);
    if (rc != FITFARM_OK)
        goto cleanup;
    atomic_store(&s_last, self);
    *out = self;
    self = NULL;
cleanup:
    if (lifeline_r >= 0)
        close(lifeline_r); /* the daemons hold their copies */
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
    s_describe_end(status, what, "", err, errlen);
    return FITFARM_ECONNECT;
}

int client_pool_check(client_pool_t *self, char *err, size_t errlen)
{
    int rc = s_check_one(&self->broker_pid, "broker", err, errlen);
    if (rc == 0)
        rc = s_check_one(&self->worker_pid, "worker", err, errlen);
    return rc;
}

/* Reaps pid if it ended; returns 1 when it is gone. A host that reaps every
 * child itself (waitpid(-1) in its SIGCHLD handler) gives ECHILD: gone too. */
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
    client_pool_t *expected = self;
    atomic_compare_exchange_strong(&s_last, &expected, NULL);
    /* A kept store: SIGTERM, so the worker drains (running evaluations
     * finish and are stored for a resume) and the broker commits. A scratch
     * store keeps nothing worth waiting for: closing the lifeline makes the
     * worker kill its running evaluations and leave at once (a Ctrl-C in a
     * long evaluation must not take the drain's seconds). */
    if (self->scratch && self->lifeline_w >= 0) {
        close(self->lifeline_w);
        self->lifeline_w = -1;
    } else {
        if (self->worker_pid > 0)
            kill(self->worker_pid, SIGTERM);
        if (self->broker_pid > 0)
            kill(self->broker_pid, SIGTERM);
    }
    int64_t deadline = s_now_ms() + POOL_STOP_MS;
    long nap = 1;
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
        s_nap_ms(nap);
        if (nap < 10)
            nap *= 2;
    }
    if (self->lifeline_w >= 0)
        close(self->lifeline_w);
    if (self->dir[0])
        s_remove_dir(self->dir);
    if (self->lock_fd >= 0)
        close(self->lock_fd);
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

void client_pool_test_last(pid_t *broker, pid_t *worker, const char **dir)
{
    client_pool_pids(atomic_load(&s_last), broker, worker, dir);
}
