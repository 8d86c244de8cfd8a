/* child.h: the loop of one child process of the pool. Internal to the worker.
 *
 * A child reads one job at a time from its socketpair, evaluates it with the
 * plugin the job names, and writes back one outcome (frame.h). It keeps a small
 * LRU cache of plugin contexts per (plugin, params), so a run's thousands of
 * jobs create their context once. It owns the mapping of plugin results to
 * statuses (EINVAL -> invalid, EFAIL or a non-finite objective -> failed,
 * unknown plugin or a failed create -> invalid) and the CPU time and peak
 * memory of each evaluation. Deaths and time-outs are the parent's business
 * (pool.c): a child that crashes simply stops answering. */
#ifndef WORKER_CHILD_H
#define WORKER_CHILD_H

#include <stddef.h>
#include <sys/types.h>

#include "registry.h"

#define WORKER_CHILD_CONTEXTS 8 /* cached plugin contexts per child */

/* Runs in a freshly forked child: dies with parent (PR_SET_PDEATHSIG), ignores
 * SIGINT/SIGTERM (the parent decides when children stop: a Ctrl-C or a
 * service manager's SIGTERM to the whole group must not kill running
 * evaluations during a drain), applies the address-space limit when
 * mem_limit_mb > 0, then serves jobs on fd until end of file. Never returns:
 * leaves with _exit (the parent's atexit handlers are not the child's). */
void worker_child_run(int fd, const worker_registry_t *registry, size_t mem_limit_mb,
                      pid_t parent) __attribute__((noreturn));

#endif
