/* fdlimit.h: the descriptor limit of a daemon. Each connection of the
 * broker, and each child of a worker, costs descriptors; a distribution's
 * default soft limit (often 1024) is far below the hard one (often 524288),
 * so the daemons raise the soft limit to the hard one when they start and say
 * so, once. Not here: what to do when even that runs out (broker/loop.c). */
#ifndef COMMON_FDLIMIT_H
#define COMMON_FDLIMIT_H

#include <stdint.h>

/* Raises the soft RLIMIT_NOFILE to the hard one and logs one line naming
 * both (who is the daemon's name, for the line). Returns the soft limit in
 * force afterwards (0 if it cannot be read). Never fails the caller. */
uint64_t common_fdlimit_raise(const char *who);

/* The soft RLIMIT_NOFILE now, or 0 if it cannot be read. */
uint64_t common_fdlimit_soft(void);

/* The highest descriptor number, plus one, that common_fdlimit_close_from
 * falls back to: sysconf(_SC_OPEN_MAX), at most 65536. sysconf is not
 * async-signal-safe, so a process that forks asks before it forks. */
long common_fdlimit_close_max(void);

/* Closes every descriptor from `from` up except keep (-1: none), as a child
 * does before it runs code that must not hold its parent's descriptors.
 * close_range(2) where the kernel has it (Linux 5.9 and later): a daemon
 * raised to a hard limit of 20,000 or more descriptors otherwise spends one
 * close per number. Falls back to that loop below max_fd. Async-signal-safe
 * (for the child of a threaded process). */
void common_fdlimit_close_from(int from, int keep, long max_fd);

#endif
