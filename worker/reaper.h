/* reaper.h: finding and killing the processes a plugin leaves behind.
 * Internal to the worker.
 *
 * A plugin (a shared object in a worker child, or an exec program) may start
 * processes of its own, and those may double-fork, call setsid() or ignore
 * SIGTERM. Killing a process group does not reach one that left the group,
 * so the worker and each of its children are child subreapers
 * (PR_SET_CHILD_SUBREAPER, Linux 3.4+): an orphan is reparented to the
 * nearest of them instead of init, where a sweep finds it as a child of ours
 * and kills it. Killing a process reparents its own children to us in turn,
 * so a sweep repeats until nothing but the processes it must keep is left.
 *
 * Children are listed from /proc/PID/task/TID/children (Linux 3.5+, kernel
 * option CONFIG_PROC_CHILDREN); where that file is missing, from a scan of
 * every /proc/PID/stat for the parent field. Not owned here: the process
 * groups of children and co-processes (pool.c, exec_plugin.c), the cgroups
 * that also outlast a killed worker (cgroup.h). Single-threaded use only. */
#ifndef WORKER_REAPER_H
#define WORKER_REAPER_H

#include <stddef.h>
#include <sys/types.h>

#define WORKER_REAPER_MAX_CHILDREN 4096u /* children one listing returns at most */

/* Makes the calling process a child subreaper. Returns 0, or -1 (errno set)
 * on a kernel without it. Not inherited across fork. */
int worker_reaper_become(void);

/* 1 if the calling process has any child (running or a zombie, forked by
 * any of its threads or reparented to it), else 0. One system call: the
 * cheap test before a listing (which reads /proc, about 100 us). */
int worker_reaper_any(void);

/* Lists the children of process parent (any of its threads) into out, at
 * most max. Returns the count. A process that vanishes meanwhile is skipped. */
size_t worker_reaper_children(pid_t parent, pid_t *out, size_t max);

/* SIGKILLs and reaps every child of the calling process whose id is not in
 * keep[0..n_keep), then does so again for the orphans that reparents to us,
 * until none is left or budget_ms passed. Returns how many it killed. Must
 * not race with another waitpid of the same children. */
unsigned worker_reaper_sweep(const pid_t *keep, size_t n_keep, int budget_ms);

struct rusage;
/* Waits for child pid, which is exiting (its socket closed), and returns its
 * wait status with its resource use in *ru; SIGKILLs it if it lingers past
 * grace_ms. */
int worker_reaper_wait(pid_t pid, int grace_ms, struct rusage *ru);
/* "evaluation killed by signal 11 (SIGSEGV)" and the like, for a wait status. */
void worker_reaper_describe(int status, char *out, size_t outlen);

#endif
