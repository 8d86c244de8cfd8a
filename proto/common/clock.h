/* clock.h: monotonic time for timers and leases, and wall time for logs. */
#ifndef COMMON_CLOCK_H
#define COMMON_CLOCK_H

#include <stdint.h>

int64_t common_clock_ms(void);   /* CLOCK_MONOTONIC, milliseconds */
int64_t common_clock_us(void);   /* CLOCK_MONOTONIC, microseconds */
int64_t common_wall_ms(void);    /* CLOCK_REALTIME, milliseconds since the epoch */
double common_wall_seconds(void); /* CLOCK_REALTIME, seconds since the epoch (stored time stamps) */

#endif
