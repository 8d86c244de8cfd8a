/* cgroup.c: the worker's cgroup v2 folders and their keeper (cgroup.h).
 * Paths and files as the kernel documents them (Documentation/admin-guide/
 * cgroup-v2.rst: cgroup.procs, cgroup.kill, cgroup.events). */
#include "cgroup.h"

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

#include "common/fdlimit.h"
#include "common/log.h"

#define S_EMPTY_WAIT_MS 5000 /* how long a kill waits for a cgroup to empty */

static void s_why(char *why, size_t len, const char *fmt, const char *a, const char *b)
{
    if (why && len)
        snprintf(why, len, fmt, a, b ? b : "");
}

/* The cgroup2 mount point and its root (fields 5 and 4 of mountinfo). */
static int s_find_mount(char *mount, size_t mlen, char *root, size_t rlen)
{
    FILE *f = fopen("/proc/self/mountinfo", "re");
    if (!f)
        return -1;
    char line[8192];
    int found = -1;
    while (found != 0 && fgets(line, sizeof line, f)) {
        char *sep = strstr(line, " - ");
        if (!sep || strncmp(sep + 3, "cgroup2 ", 8) != 0)
            continue;
        char r[4096], m[4096];
        if (sscanf(line, "%*s %*s %*s %4095s %4095s", r, m) == 2) {
            snprintf(mount, mlen, "%s", m);
            snprintf(root, rlen, "%s", r);
            found = 0;
        }
    }
    fclose(f);
    return found;
}

/* Our cgroup v2 path, the "0::PATH" line of /proc/self/cgroup. */
static int s_own_path(char *out, size_t len)
{
    FILE *f = fopen("/proc/self/cgroup", "re");
    if (!f)
        return -1;
    char line[4096];
    int found = -1;
    while (found != 0 && fgets(line, sizeof line, f)) {
        if (strncmp(line, "0::", 3) != 0)
            continue;
        line[strcspn(line, "\n")] = '\0';
        snprintf(out, len, "%s", line + 3);
        found = 0;
    }
    fclose(f);
    return found;
}

static int s_write(const char *dir, const char *file, const char *text)
{
    char path[WORKER_CGROUP_PATH_MAX + 64];
    snprintf(path, sizeof path, "%s/%s", dir, file);
    int fd = open(path, O_WRONLY | O_CLOEXEC);
    if (fd < 0)
        return -1;
    ssize_t n = write(fd, text, strlen(text));
    int e = errno;
    close(fd);
    errno = e;
    return n == (ssize_t)strlen(text) ? 0 : -1;
}

/* The process ids listed in dir/cgroup.procs, at most max; the count. */
static size_t s_procs(const char *dir, pid_t *out, size_t max)
{
    char path[WORKER_CGROUP_PATH_MAX + 64];
    snprintf(path, sizeof path, "%s/cgroup.procs", dir);
    FILE *f = fopen(path, "re");
    if (!f)
        return 0;
    size_t n = 0;
    long pid;
    while (n < max && fscanf(f, "%ld", &pid) == 1)
        if (pid > 0)
            out[n++] = (pid_t)pid;
    fclose(f);
    return n;
}

static void s_sleep_ms(int ms)
{
    struct timespec ts = {.tv_sec = ms / 1000, .tv_nsec = (long)(ms % 1000) * 1000000L};
    while (nanosleep(&ts, &ts) != 0 && errno == EINTR)
        ;
}

/* SIGKILLs everything in dir and waits (bounded) until it is empty; the
 * count listed at the start. */
static unsigned s_kill_dir(const char *dir, int has_kill)
{
    pid_t pids[1024];
    size_t first = s_procs(dir, pids, sizeof pids / sizeof pids[0]);
    if (first == 0)
        return 0;
    for (int waited = 0; waited < S_EMPTY_WAIT_MS; waited += 10) {
        /* cgroup.kill also catches what forks while we kill; without it,
         * signal each listed process and look again */
        if (has_kill) {
            if (waited == 0 || waited % 500 == 0)
                (void)s_write(dir, "cgroup.kill", "1");
        } else {
            size_t n = s_procs(dir, pids, sizeof pids / sizeof pids[0]);
            for (size_t i = 0; i < n; i++)
                kill(pids[i], SIGKILL);
        }
        if (s_procs(dir, pids, 1) == 0)
            return (unsigned)first;
        s_sleep_ms(10);
    }
    LOG_WARN("cgroup %s still holds processes %d s after SIGKILL", dir, S_EMPTY_WAIT_MS / 1000);
    return (unsigned)first;
}

/* Kills and removes every slot-N folder of dir, then dir. */
static void s_empty_all(const char *dir, int has_kill, unsigned *killed)
{
    DIR *d = opendir(dir);
    if (d) {
        struct dirent *de;
        while ((de = readdir(d))) {
            if (strncmp(de->d_name, "slot-", 5) != 0)
                continue;
            char sub[WORKER_CGROUP_PATH_MAX + 64];
            snprintf(sub, sizeof sub, "%s/%s", dir, de->d_name);
            unsigned n = s_kill_dir(sub, has_kill);
            if (killed)
                *killed += n;
            (void)rmdir(sub);
        }
        closedir(d);
    }
    (void)rmdir(dir);
}

/* The keeper: waits for end of file on rd (the worker is gone), then
 * empties the folders. Ignores the signals a terminal or a batch system
 * sends a whole job, so that it outlives a worker killed by them. */
static void s_keeper(int rd, const char *dir, int has_kill, pid_t worker, long max_fd)
{
    (void)prctl(PR_SET_NAME, "fitfarm-keeper", 0, 0, 0);
    (void)setsid(); /* out of the worker's process group: a kill of the group spares it */
    signal(SIGTERM, SIG_IGN);
    signal(SIGINT, SIG_IGN);
    signal(SIGHUP, SIG_IGN);
    signal(SIGPIPE, SIG_IGN);
    /* Nothing of the worker's but the pipe and the log stays open here. */
    common_fdlimit_close_from(3, rd, max_fd);
    char b;
    ssize_t r;
    while ((r = read(rd, &b, 1)) != 0)
        if (r < 0 && errno != EINTR)
            break;
    unsigned killed = 0;
    s_empty_all(dir, has_kill, &killed);
    if (killed)
        LOG_WARN("keeper: worker %d is gone; killed the %u processes its plugins left in %s",
                 (int)worker, killed, dir);
    _exit(0);
}

/* Folders of workers that are gone, keeper and all (a kill of every process
 * by name, a machine's hard stop), in parent: removed when they hold
 * nothing (rmdir refuses a cgroup with processes, which are left alone). */
static void s_remove_stale(const char *parent)
{
    DIR *d = opendir(parent);
    if (!d)
        return;
    struct dirent *de;
    while ((de = readdir(d))) {
        int pid = 0;
        if (sscanf(de->d_name, "fitfarm-worker-%d", &pid) != 1 || pid <= 0 ||
            kill(pid, 0) == 0 || errno != ESRCH)
            continue;
        char dir[2 * WORKER_CGROUP_PATH_MAX + 300], sub[sizeof dir + 300];
        snprintf(dir, sizeof dir, "%s/%s", parent, de->d_name);
        DIR *sd = opendir(dir);
        struct dirent *se;
        while (sd && (se = readdir(sd)))
            if (strncmp(se->d_name, "slot-", 5) == 0) {
                snprintf(sub, sizeof sub, "%s/%s", dir, se->d_name);
                (void)rmdir(sub);
            }
        if (sd)
            closedir(sd);
        if (rmdir(dir) == 0)
            LOG_INFO("removed %s, left by a worker that is gone", dir);
    }
    closedir(d);
}

int worker_cgroup_open(worker_cgroup_t *cg, char *why, size_t whylen)
{
    memset(cg, 0, sizeof *cg);
    cg->keeper_fd = -1;
    char mount[4096], root[4096], own[4096];
    if (s_find_mount(mount, sizeof mount, root, sizeof root) != 0) {
        s_why(why, whylen, "no cgroup2 file system is mounted%s%s", "", NULL);
        return -1;
    }
    if (s_own_path(own, sizeof own) != 0) {
        s_why(why, whylen, "/proc/self/cgroup has no cgroup v2 line%s%s", "", NULL);
        return -1;
    }
    /* A mount of a subtree (root not "/") shows paths below its root. */
    const char *rel = own;
    size_t rl = strlen(root);
    if (strcmp(root, "/") != 0 && strncmp(own, root, rl) == 0)
        rel = own + rl;
    if (strcmp(rel, "/") == 0)
        rel = "";
    char parent[2 * WORKER_CGROUP_PATH_MAX + 8];
    snprintf(parent, sizeof parent, "%s%s", mount, rel);
    s_remove_stale(parent);
    int n = snprintf(cg->dir, sizeof cg->dir, "%s%s/fitfarm-worker-%d", mount, rel, (int)getpid());
    if (n < 0 || (size_t)n >= sizeof cg->dir) {
        s_why(why, whylen, "the cgroup path under %s is too long%s", mount, NULL);
        return -1;
    }
    if (mkdir(cg->dir, 0755) != 0 && errno != EEXIST) {
        s_why(why, whylen, "cannot create %s: %s", cg->dir, strerror(errno));
        return -1;
    }
    /* Moving a process needs write access to the common ancestor's
     * cgroup.procs too: try it with a process that then exits. */
    char probe[WORKER_CGROUP_PATH_MAX + 16];
    snprintf(probe, sizeof probe, "%s/slot-probe", cg->dir);
    (void)mkdir(probe, 0755);
    pid_t p = fork();
    if (p == 0)
        _exit(s_write(probe, "cgroup.procs", "0") == 0 ? 0 : 10 + (errno & 0x3f));
    int st = 0;
    while (p > 0 && waitpid(p, &st, 0) < 0 && errno == EINTR)
        ;
    (void)rmdir(probe);
    if (p < 0 || !WIFEXITED(st) || WEXITSTATUS(st) != 0) {
        int e = p > 0 && WIFEXITED(st) && WEXITSTATUS(st) >= 10 ? WEXITSTATUS(st) - 10 : errno;
        s_why(why, whylen, "cannot move a process into %s: %s", cg->dir, strerror(e));
        (void)rmdir(cg->dir);
        return -1;
    }
    char kill_path[WORKER_CGROUP_PATH_MAX + 16];
    snprintf(kill_path, sizeof kill_path, "%s/cgroup.kill", cg->dir);
    cg->has_kill = access(kill_path, W_OK) == 0;
    int fds[2];
    if (pipe2(fds, O_CLOEXEC) != 0) {
        s_why(why, whylen, "cannot make the keeper's pipe: %s%s", strerror(errno), NULL);
        (void)rmdir(cg->dir);
        return -1;
    }
    pid_t worker = getpid();
    long max_fd = common_fdlimit_close_max(); /* not async-signal-safe: ask before fork */
    pid_t mid = fork();
    if (mid == 0) {
        close(fds[1]);
        pid_t k = fork();
        if (k == 0)
            s_keeper(fds[0], cg->dir, cg->has_kill, worker, max_fd);
        _exit(k < 0 ? 1 : 0); /* the keeper is reparented away from the worker */
    }
    close(fds[0]);
    st = 0;
    while (mid > 0 && waitpid(mid, &st, 0) < 0 && errno == EINTR)
        ;
    if (mid < 0 || !WIFEXITED(st) || WEXITSTATUS(st) != 0) {
        s_why(why, whylen, "cannot start the keeper process: %s%s", strerror(errno), NULL);
        close(fds[1]);
        (void)rmdir(cg->dir);
        return -1;
    }
    cg->keeper_fd = fds[1];
    cg->enabled = 1;
    return 0;
}

void worker_cgroup_setup(worker_cgroup_t *cg, int disabled)
{
    char why[WORKER_CGROUP_PATH_MAX + 256] = "";
    if (disabled) {
        memset(cg, 0, sizeof *cg);
        cg->keeper_fd = -1;
        LOG_INFO("no cgroups (--no-cgroup): plugins' processes are found by process group and "
                 "the subreaper only");
    } else if (worker_cgroup_open(cg, why, sizeof why) == 0) {
        LOG_INFO("each slot runs in a cgroup of its own under %s (keeper started)", cg->dir);
    } else {
        LOG_INFO("no cgroups: %s; plugins' processes are found by process group and the "
                 "subreaper only, so one that calls setsid() may outlive a worker killed "
                 "with SIGKILL (--no-cgroup silences this)",
                 why);
    }
}

int worker_cgroup_slot_fd(worker_cgroup_t *cg, unsigned slot)
{
    if (!cg || !cg->enabled)
        return -1;
    char dir[WORKER_CGROUP_PATH_MAX + 32], path[WORKER_CGROUP_PATH_MAX + 64];
    snprintf(dir, sizeof dir, "%s/slot-%u", cg->dir, slot);
    if (mkdir(dir, 0755) != 0 && errno != EEXIST) {
        LOG_WARN("cannot create cgroup %s: %s; slot %u runs in the worker's", dir,
                 strerror(errno), slot);
        return -1;
    }
    snprintf(path, sizeof path, "%s/cgroup.procs", dir);
    int fd = open(path, O_WRONLY | O_CLOEXEC);
    if (fd < 0)
        LOG_WARN("cannot open %s: %s", path, strerror(errno));
    return fd;
}

int worker_cgroup_enter(worker_cgroup_t *cg, int slot_fd)
{
    if (cg && cg->keeper_fd >= 0)
        close(cg->keeper_fd); /* only the worker may hold it: its exit is the signal */
    if (slot_fd < 0)
        return -1;
    int rc = write(slot_fd, "0", 1) == 1 ? 0 : -1;
    if (rc != 0)
        LOG_WARN("child %d: cannot enter its cgroup: %s", (int)getpid(), strerror(errno));
    close(slot_fd);
    return rc;
}

unsigned worker_cgroup_kill_slot(worker_cgroup_t *cg, unsigned slot)
{
    if (!cg || !cg->enabled)
        return 0;
    char dir[WORKER_CGROUP_PATH_MAX + 32];
    snprintf(dir, sizeof dir, "%s/slot-%u", cg->dir, slot);
    return s_kill_dir(dir, cg->has_kill);
}

void worker_cgroup_close(worker_cgroup_t *cg)
{
    if (!cg || !cg->enabled)
        return;
    unsigned killed = 0;
    s_empty_all(cg->dir, cg->has_kill, &killed);
    if (killed)
        LOG_INFO("killed %u processes left in the worker's cgroups", killed);
    close(cg->keeper_fd); /* the keeper finds nothing left and exits */
    cg->keeper_fd = -1;
    cg->enabled = 0;
}
