/* reaper.c: child subreaper, child listing and the kill-and-reap sweep
 * (reaper.h). Knows nothing of jobs or plugins: callers say which children
 * to keep. */
#include "reaper.h"

#include <dirent.h>
#include <errno.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/prctl.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "common/clock.h"

#define S_MAX_ROUNDS 64 /* a fork bomb must not hold a sweep for ever */

int worker_reaper_become(void)
{
    return prctl(PR_SET_CHILD_SUBREAPER, 1, 0, 0, 0);
}

int worker_reaper_any(void)
{
    siginfo_t info;
    memset(&info, 0, sizeof info);
    /* WNOWAIT and WNOHANG: looks, reaps nothing, never blocks. ECHILD is
     * the only way it says "no children". */
    int rc;
    while ((rc = waitid(P_ALL, 0, &info, WEXITED | WNOHANG | WNOWAIT)) != 0 && errno == EINTR)
        ;
    return rc == 0 || errno != ECHILD;
}

static int s_is_number(const char *s)
{
    if (!*s)
        return 0;
    for (; *s; s++)
        if (*s < '0' || *s > '9')
            return 0;
    return 1;
}

/* Appends the process ids listed in file path (blank-separated). Returns -1
 * if the file cannot be opened. */
static int s_read_ids(const char *path, pid_t *out, size_t max, size_t *n)
{
    FILE *f = fopen(path, "re");
    if (!f)
        return -1;
    long v;
    while (*n < max && fscanf(f, "%ld", &v) == 1)
        if (v > 0)
            out[(*n)++] = (pid_t)v;
    fclose(f);
    return 0;
}

/* The slow way: every process's stat line, field 4 is its parent. The
 * command (field 2) may hold blanks and parentheses, so parse after the
 * last ')'. */
static size_t s_scan_stat(pid_t parent, pid_t *out, size_t max)
{
    size_t n = 0;
    DIR *d = opendir("/proc");
    if (!d)
        return 0;
    struct dirent *e;
    while (n < max && (e = readdir(d))) {
        if (!s_is_number(e->d_name))
            continue;
        char path[300], line[1024];
        snprintf(path, sizeof path, "/proc/%s/stat", e->d_name);
        FILE *f = fopen(path, "re");
        if (!f)
            continue;
        size_t got = fread(line, 1, sizeof line - 1, f);
        fclose(f);
        line[got] = '\0';
        char *rp = strrchr(line, ')');
        char state;
        long ppid;
        if (rp && sscanf(rp + 1, " %c %ld", &state, &ppid) == 2 && ppid == (long)parent)
            out[n++] = (pid_t)atol(e->d_name);
    }
    closedir(d);
    return n;
}

size_t worker_reaper_children(pid_t parent, pid_t *out, size_t max)
{
    char path[64];
    snprintf(path, sizeof path, "/proc/%ld/task", (long)parent);
    DIR *d = opendir(path);
    if (!d)
        return 0; /* no such process (or no /proc): it has no children we can see */
    size_t n = 0;
    int missing = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (!s_is_number(e->d_name))
            continue;
        char file[320];
        snprintf(file, sizeof file, "/proc/%ld/task/%s/children", (long)parent, e->d_name);
        if (s_read_ids(file, out, max, &n) != 0 && errno == ENOENT) {
            /* A thread that just ended, or a kernel without the file: tell
             * them apart by the main thread, which exists while we look. */
            if (atol(e->d_name) == (long)parent) {
                missing = 1;
                break;
            }
        }
    }
    closedir(d);
    return missing ? s_scan_stat(parent, out, max) : n;
}

static int s_kept(pid_t pid, const pid_t *keep, size_t n_keep)
{
    for (size_t i = 0; i < n_keep; i++)
        if (keep[i] == pid)
            return 1;
    return 0;
}

unsigned worker_reaper_sweep(const pid_t *keep, size_t n_keep, int budget_ms)
{
    static pid_t ids[WORKER_REAPER_MAX_CHILDREN];
    unsigned killed = 0;
    int64_t until = common_clock_ms() + budget_ms;
    for (int round = 0; round < S_MAX_ROUNDS; round++) {
        size_t n = worker_reaper_children(getpid(), ids, WORKER_REAPER_MAX_CHILDREN);
        size_t victims = 0;
        for (size_t i = 0; i < n; i++) {
            if (s_kept(ids[i], keep, n_keep))
                continue;
            kill(ids[i], SIGKILL);
            ids[victims++] = ids[i];
        }
        if (victims == 0)
            break;
        /* Reaping waits for the death, so the victim's own children are
         * ours by the time the next round lists them. */
        for (size_t i = 0; i < victims; i++) {
            while (waitpid(ids[i], NULL, 0) < 0 && errno == EINTR)
                ;
            killed++;
        }
        if (common_clock_ms() >= until)
            break;
    }
    return killed;
}

int worker_reaper_wait(pid_t pid, int grace_ms, struct rusage *ru)
{
    int status = 0;
    int64_t until = common_clock_ms() + grace_ms;
    for (;;) {
        pid_t r = wait4(pid, &status, WNOHANG, ru);
        if (r == pid)
            return status;
        if (r < 0 && errno != EINTR)
            return 0;
        if (common_clock_ms() >= until)
            break;
        struct timespec ts = {0, 2 * 1000 * 1000};
        nanosleep(&ts, NULL);
    }
    kill(pid, SIGKILL);
    while (wait4(pid, &status, 0, ru) < 0 && errno == EINTR)
        ;
    return status;
}

void worker_reaper_describe(int status, char *out, size_t outlen)
{
    if (WIFSIGNALED(status)) {
        int sig = WTERMSIG(status);
        const char *abbrev = sigabbrev_np(sig);
        snprintf(out, outlen, "evaluation killed by signal %d (SIG%s)", sig,
                 abbrev ? abbrev : "?");
    } else if (WIFEXITED(status)) {
        snprintf(out, outlen, "evaluation ended its process with exit status %d",
                 WEXITSTATUS(status));
    } else {
        snprintf(out, outlen, "evaluation process ended (wait status %#x)", (unsigned)status);
    }
}
