/* clock.c: the process's clocks. Timers, leases and time-outs use the
 * monotonic clock (never jumps when an administrator or NTP sets the time);
 * only log lines and stored timestamps use wall time. */
#include <time.h>

#include "clock.h"

static int64_t s_ns(clockid_t id)
{
    struct timespec ts;
    clock_gettime(id, &ts);
    return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

int64_t common_clock_ms(void)
{
    return s_ns(CLOCK_MONOTONIC) / 1000000;
}

int64_t common_clock_us(void)
{
    return s_ns(CLOCK_MONOTONIC) / 1000;
}

int64_t common_wall_ms(void)
{
    return s_ns(CLOCK_REALTIME) / 1000000;
}

double common_wall_seconds(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec / 1e9;
}
