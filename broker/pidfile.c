/* pidfile.c: the broker's PID file (pidfile.h): checked before the broker
 * binds anything, written once both endpoints listen, removed when it
 * exits through its cleanup. A live process named by the file stops the
 * start: two brokers sharing one PID file would send a reload to the wrong
 * one. Not here: the store's own lock (store_lock.c). */
#include "pidfile.h"

#include <errno.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "common/replace_file.h"

/* The PID path names, or 0 (missing, unreadable, not a PID). */
static long s_read_pid(const char *path)
{
    FILE *f = fopen(path, "r");
    if (!f)
        return 0;
    char line[32] = "";
    char *got = fgets(line, sizeof line, f);
    fclose(f);
    if (!got)
        return 0;
    char *end = NULL;
    errno = 0;
    long pid = strtol(line, &end, 10);
    if (errno || end == line || (*end != '\n' && *end != '\0') || pid <= 0)
        return 0;
    return pid;
}

int broker_pidfile_check(const char *path, char *err, size_t errlen)
{
    long pid = s_read_pid(path);
    if (pid == 0 || pid == (long)getpid())
        return 0;
    /* EPERM: it exists but belongs to another user; still alive. */
    if (kill((pid_t)pid, 0) == 0 || errno == EPERM) {
        snprintf(err, errlen,
                 "the PID file %s names process %ld, which is running (another broker?); "
                 "stop it, or give this broker its own --pid-file",
                 path, pid);
        return -1;
    }
    return 0;
}

int broker_pidfile_write(const char *path, char *err, size_t errlen)
{
    char text[32];
    int n = snprintf(text, sizeof text, "%ld\n", (long)getpid());
    if (common_replace_file(path, text, (size_t)n, 0) != 0) {
        snprintf(err, errlen, "cannot write the PID file %s: %s", path, strerror(errno));
        return -1;
    }
    return 0;
}

void broker_pidfile_remove(const char *path)
{
    if (s_read_pid(path) == (long)getpid())
        (void)unlink(path);
}
