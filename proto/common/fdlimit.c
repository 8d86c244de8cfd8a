/* fdlimit.c: raising and reading RLIMIT_NOFILE (fdlimit.h). */
#include "fdlimit.h"

#include <errno.h>
#include <string.h>
#include <sys/resource.h>

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
