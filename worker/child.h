/* child.h: the loop of one child process of the pool. Internal to the worker.
 *
 * A child reads jobs from its socketpair (the parent may queue several in it),
 * evaluates them one at a time, in order, with the plugin each names, and
 * writes back one outcome per job (frame.h). Answers of quick evaluations are
 * batched: they leave together when the child runs out of input, after
 * WORKER_CHILD_BATCH answers, or after any evaluation slower than
 * WORKER_CHILD_BATCH_US; a slow evaluation's answer leaves at once. Before
 * each evaluation the child publishes which job is running and since when in
 * a status block shared with the parent, so the parent knows exactly which job
 * a death or an overrun belongs to (pool.c). It keeps a small
 * LRU cache of plugin contexts per (plugin, params), so a run's thousands of
 * jobs create their context once. It owns the mapping of plugin results to
 * statuses (EINVAL -> invalid, EFAIL or a non-finite objective -> failed,
 * unknown plugin or a failed create -> invalid) and the CPU time and peak
 * memory of each evaluation. Deaths and time-outs are the parent's business
 * (pool.c): a child that crashes simply stops answering. */
#ifndef WORKER_CHILD_H
#define WORKER_CHILD_H

#include <stdatomic.h>
#include <stddef.h>
#include <stdint.h>
#include <sys/types.h>

#include "registry.h"

#define WORKER_CHILD_CONTEXTS 8 /* cached plugin contexts per child */
#define WORKER_CHILD_BATCH 32     /* answers held back at most */
#define WORKER_CHILD_BATCH_US 200 /* an evaluation this slow sends its answers now */

/* One per child, in memory shared with the parent (MAP_SHARED, set up before
 * fork). The child stores start_us, then running; it clears running once the
 * answer is encoded. The parent only reads, and treats the values as
 * untrusted (a plugin can scribble on its process's memory). */
typedef struct {
    _Atomic uint64_t running; /* sequence number (1, 2, ...) of the job being
                                 evaluated, counted per child process; 0: none */
    _Atomic int64_t start_us; /* common_clock_us() when it started */
    char pad[48];             /* one cache line per child */
} worker_child_status_t;

/* Runs in a freshly forked child: dies with parent (PR_SET_PDEATHSIG), ignores
 * SIGINT/SIGTERM (the parent decides when children stop: a Ctrl-C or a
 * service manager's SIGTERM to the whole group must not kill running
 * evaluations during a drain), applies the address-space limit when
 * mem_limit_mb > 0, then serves jobs on fd until end of file. Never returns:
 * leaves with _exit (the parent's atexit handlers are not the child's). */
void worker_child_run(int fd, const worker_registry_t *registry, size_t mem_limit_mb,
                      pid_t parent, worker_child_status_t *status) __attribute__((noreturn));

/* The first steps of a freshly forked child before worker_child_run:
 * stdout and stderr (the plugin's and its programs') onto out_fd, the pipe
 * the worker reads a bounded part of (output.h), and a lower CPU priority
 * (nice_incr 0..19, checked by main.c; lowering needs no privilege and the
 * plugin's own processes inherit it). Never returns. */
void worker_child_enter(int fd, int out_fd, int nice_incr, const worker_registry_t *registry,
                        size_t mem_limit_mb, pid_t parent, worker_child_status_t *status)
    __attribute__((noreturn));

#endif
