/* lifeline.c: the daemon's side of the lifeline pipe (see lifeline.h): the
 * flag's validation and the end-of-file test. Not here: polling (each daemon's
 * loop puts the descriptor in its zmq_poll set) or what a daemon does when
 * its starter is gone. */
#include "lifeline.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <unistd.h>

int common_lifeline_open(const char *text, char *err, unsigned long errlen)
{
    char *end = NULL;
    errno = 0;
    long fd = strtol(text, &end, 10);
    /* 0-2 are stdio: a lifeline there would be a caller's mistake, and stdin
     * reaching EOF is common. */
    if (errno || !end || *end || end == text || fd < 3 || fd > 1023) {
        snprintf(err, errlen, "--lifeline-fd needs a descriptor number from 3 to 1023, not '%s'",
                 text);
        return -1;
    }
    int flags = fcntl((int)fd, F_GETFL);
    if (flags < 0) {
        snprintf(err, errlen, "--lifeline-fd %ld is not an open descriptor", fd);
        return -1;
    }
    if (fcntl((int)fd, F_SETFL, flags | O_NONBLOCK) != 0) {
        snprintf(err, errlen, "--lifeline-fd %ld: cannot make it non-blocking", fd);
        return -1;
    }
    /* Our own children (the worker's evaluation processes, plugin
     * co-processes) need not hold it. */
    fcntl((int)fd, F_SETFD, FD_CLOEXEC);
    return (int)fd;
}

int common_lifeline_gone(int fd)
{
    char buf[64];
    /* Bounded: a misbehaving starter that writes cannot keep us here. */
    for (int i = 0; i < 16; i++) {
        ssize_t n = read(fd, buf, sizeof buf);
        if (n > 0)
            continue;
        if (n == 0)
            return 1;
        if (errno == EINTR)
            continue;
        return errno == EAGAIN || errno == EWOULDBLOCK ? 0 : 1;
    }
    return 0;
}
