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

#endif
