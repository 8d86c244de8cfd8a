/* store_lock.c: the store folder's lock (see store_lock.h). Not here: the
 * database itself (store.c). */
#include "store_lock.h"

#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <signal.h>
#include <stdio.h>
#include <string.h>
#include <sys/file.h>
#include <time.h>
#include <unistd.h>

#include "common/clock.h"
#include "common/log.h"

#define LOCK_RECORD_BYTES 512
#define LOCK_RETRY_MS 20

/* Reads the holder's record ("pid N\nhost H\n...") into pid and host;
 * bounded: at most LOCK_RECORD_BYTES are read, and anything unexpected
 * leaves pid 0 and host "". */
static void s_read_holder(int fd, long *pid, char *host, size_t hostlen)
{
    char buf[LOCK_RECORD_BYTES + 1];
    *pid = 0;
    host[0] = '\0';
    ssize_t n = pread(fd, buf, LOCK_RECORD_BYTES, 0);
    if (n <= 0)
        return;
    buf[n] = '\0';
    char name[256];
    if (sscanf(buf, "pid %ld\nhost %255s", pid, name) == 2)
        snprintf(host, hostlen, "%s", name);
    else
        *pid = 0;
}

static void s_write_holder(int fd)
{
    char host[256] = "";
    if (gethostname(host, sizeof host - 1) != 0 || !host[0])
        snprintf(host, sizeof host, "unknown");
    host[sizeof host - 1] = '\0';
    char buf[LOCK_RECORD_BYTES];
    int n = snprintf(buf, sizeof buf, "pid %ld\nhost %s\nsince %" PRId64 "\n", (long)getpid(),
                     host, (int64_t)time(NULL));
    if (n > 0 && ftruncate(fd, 0) == 0 && pwrite(fd, buf, (size_t)n, 0) == n)
        (void)fsync(fd);
}

int broker_store_lock(const char *dir, int wait_ms)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/fitfarm.lock", dir);
    int fd = open(path, O_RDWR | O_CREAT | O_CLOEXEC, 0600);
    if (fd < 0) {
        LOG_ERROR("cannot open the store's lock file %s: %s", path, strerror(errno));
        return -1;
    }
    int64_t deadline = common_clock_ms() + (wait_ms > 0 ? wait_ms : 0);
    int told = 0;
    for (;;) {
        if (flock(fd, LOCK_EX | LOCK_NB) == 0) {
            if (told)
                LOG_INFO("store %s: the previous broker is gone; lock taken", dir);
            s_write_holder(fd);
            return fd;
        }
        if (errno != EWOULDBLOCK && errno != EINTR) {
            LOG_ERROR("cannot lock the store %s (%s): %s", dir, path, strerror(errno));
            close(fd);
            return -1;
        }
        long pid;
        char host[256];
        s_read_holder(fd, &pid, host, sizeof host);
        if (common_clock_ms() >= deadline) {
            char here[256] = "";
            (void)gethostname(here, sizeof here - 1);
            int local = host[0] && strcmp(host, here) == 0;
            if (pid > 0)
                LOG_ERROR("the store %s is in use by another broker: PID %ld on host %s%s; "
                          "stop it, or give this broker another --store",
                          dir, pid, host,
                          local && kill((pid_t)pid, 0) != 0 && errno == ESRCH
                              ? " (that PID is gone: some other process holds the lock file "
                                "open, perhaps one it started)"
                              : "");
            else
                LOG_ERROR("the store %s is in use by another broker (its lock file %s names "
                          "no holder); stop it, or give this broker another --store", dir, path);
            close(fd);
            return -1;
        }
        if (!told) {
            LOG_WARN("store %s is locked by broker PID %ld on %s; waiting up to %d ms for it "
                     "to end", dir, pid, host[0] ? host : "an unknown host", wait_ms);
            told = 1;
        }
        usleep(LOCK_RETRY_MS * 1000);
    }
}
