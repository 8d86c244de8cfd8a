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
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "common/clock.h"
#include "common/log.h"

#define LOCK_RECORD_BYTES 512
#define LOCK_RETRY_MS 20
/* The byte of the database file we lock: SQLite's own locks live in the
 * 512 bytes from 1 GiB (the "lock-byte page", sqlite.org/fileformat2.html),
 * its WAL locks in the -shm file; 1.25 GiB is neither. */
#define LOCK_DB_BYTE 0x50000000L
#define LOCK_MAX_HELD 8 /* stores one process holds at once (tests open several) */

static struct {
    int lock_fd, db_fd;
} s_held[LOCK_MAX_HELD];
static int s_n_held;

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

static int s_db_try(int fd)
{
    struct flock fl;
    memset(&fl, 0, sizeof fl);
    fl.l_type = F_WRLCK;
    fl.l_whence = SEEK_SET;
    fl.l_start = LOCK_DB_BYTE;
    fl.l_len = 1;
    return fcntl(fd, F_OFD_SETLK, &fl);
}

/* The database file's lock (see the top of store_lock.h). Returns its
 * descriptor or -1 (logged). */
static int s_lock_db(const char *dir, const char *db_file, int wait_ms)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", dir, db_file);
    int fd = open(path, O_RDWR | O_CREAT | O_CLOEXEC, 0600);
    if (fd < 0) {
        LOG_ERROR("cannot open the store's database %s: %s", path, strerror(errno));
        return -1;
    }
    int64_t deadline = common_clock_ms() + (wait_ms > 0 ? wait_ms : 0);
    int told = 0;
    for (;;) {
        if (s_db_try(fd) == 0) {
            if (told)
                LOG_INFO("database %s: the other broker is gone; lock taken", path);
            return fd;
        }
        if (errno != EAGAIN && errno != EACCES && errno != EINTR) {
            LOG_ERROR("cannot lock the database %s: %s", path, strerror(errno));
            close(fd);
            return -1;
        }
        struct stat st;
        unsigned long links = fstat(fd, &st) == 0 ? (unsigned long)st.st_nlink : 0;
        if (common_clock_ms() >= deadline) {
            LOG_ERROR("the database %s is in use by another broker through another path (the "
                      "file has %lu names: a hard link, or a bind mount of the folder); stop "
                      "that broker, or give this one a store of its own",
                      path, links);
            close(fd);
            return -1;
        }
        if (!told) {
            LOG_WARN("database %s is locked by another process (%lu names for the file); "
                     "waiting up to %d ms for it to end",
                     path, links, wait_ms);
            told = 1;
        }
        usleep(LOCK_RETRY_MS * 1000);
    }
}

void broker_store_unlock(int fd)
{
    if (fd < 0)
        return;
    for (int i = 0; i < s_n_held; i++) {
        if (s_held[i].lock_fd != fd)
            continue;
        close(s_held[i].db_fd); /* releases the OFD lock */
        s_held[i] = s_held[--s_n_held];
        break;
    }
    close(fd); /* releases the flock */
}

static int s_lock_dir(const char *dir, int wait_ms);

int broker_store_lock(const char *dir, const char *db_file, int wait_ms)
{
    if (s_n_held >= LOCK_MAX_HELD) {
        LOG_ERROR("cannot lock the store %s: this process holds %d stores already", dir,
                  s_n_held);
        return -1;
    }
    int fd = s_lock_dir(dir, wait_ms);
    if (fd < 0)
        return -1;
    int db_fd = s_lock_db(dir, db_file, wait_ms);
    if (db_fd < 0) {
        close(fd);
        return -1;
    }
    s_held[s_n_held].lock_fd = fd;
    s_held[s_n_held].db_fd = db_fd;
    s_n_held++;
    return fd;
}

static int s_lock_dir(const char *dir, int wait_ms)
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
