/* fdlimit.c: raising and reading RLIMIT_NOFILE, and closing inherited
 * descriptors (fdlimit.h). */
#include "fdlimit.h"

#include <errno.h>
#include <string.h>
#include <sys/resource.h>
#include <unistd.h>

#include "log.h"

uint64_t common_fdlimit_soft(void)
{
    struct rlimit rl;
    if (getrlimit(RLIMIT_NOFILE, &rl) != 0)
        return 0;
    return rl.rlim_cur == RLIM_INFINITY ? UINT64_MAX : (uint64_t)rl.rlim_cur;
}

uint64_t common_fdlimit_raise(const char *who)
{
    struct rlimit rl;
    if (getrlimit(RLIMIT_NOFILE, &rl) != 0) {
        LOG_WARN("%s: cannot read the descriptor limit: %s; keeping it", who, strerror(errno));
        return 0;
    }
    rlim_t before = rl.rlim_cur;
    if (rl.rlim_cur != rl.rlim_max) {
        rl.rlim_cur = rl.rlim_max;
        if (setrlimit(RLIMIT_NOFILE, &rl) != 0) {
            LOG_WARN("%s: cannot raise the descriptor limit from %llu to the hard limit %llu: "
                     "%s; keeping %llu",
                     who, (unsigned long long)before, (unsigned long long)rl.rlim_max,
                     strerror(errno), (unsigned long long)before);
            return (uint64_t)before;
        }
        LOG_INFO("%s: descriptor limit raised from %llu to the hard limit %llu", who,
                 (unsigned long long)before, (unsigned long long)rl.rlim_max);
    } else {
        LOG_INFO("%s: descriptor limit %llu (already the hard limit; raise it with ulimit -Hn, "
                 "prlimit or LimitNOFILE= in a systemd unit)",
                 who, (unsigned long long)before);
    }
    return (uint64_t)rl.rlim_cur;
}

long common_fdlimit_close_max(void)
{
    long max_fd = sysconf(_SC_OPEN_MAX);
    return max_fd < 0 || max_fd > 65536 ? 65536 : max_fd;
}

void common_fdlimit_close_from(int from, int keep, long max_fd)
{
    if (keep < from) {
        if (close_range((unsigned)from, ~0u, 0) == 0)
            return;
    } else if ((keep == from || close_range((unsigned)from, (unsigned)keep - 1u, 0) == 0) &&
               close_range((unsigned)keep + 1u, ~0u, 0) == 0) {
        return;
    }
    for (long fd = from; fd < max_fd; fd++) /* a kernel before 5.9 */
        if (fd != keep)
            close((int)fd);
}
