/* cgroup.h: a cgroup v2 folder per worker, one per slot inside it, and a
 * keeper process that empties them if the worker dies. Internal to the
 * worker.
 *
 * Why: process groups and the child subreaper (reaper.h) find what a plugin
 * leaves behind while the worker lives. A worker killed with SIGKILL (the
 * OOM killer, a scheduler's hard stop) takes its subreaper with it, and a
 * plugin's helper that called setsid() is then reparented to init and lives
 * on. A cgroup holds every descendant whatever it does with sessions and
 * parents, and cgroup.kill (Linux 5.14) kills them all at once.
 *
 * Layout: on the cgroup2 mount (from /proc/self/mountinfo), inside the
 * worker's own cgroup (from /proc/self/cgroup), a folder
 * fitfarm-worker-PID holding slot-N for each slot. A slot's child enters
 * slot-N right after fork, before any plugin code runs; its helpers and exec
 * programs are born inside. The worker and the keeper stay outside, so
 * killing a slot never kills them.
 *
 * Kills: a slot's whole cgroup dies with its child (a death, a time-out, a
 * cancel, a stop: pool.c), and at the worker's exit every slot is killed and
 * the folders removed. The keeper is a grandchild of the worker, started
 * before the worker becomes a subreaper (so it is not the worker's child and
 * no sweep of the worker's children touches it) in a session of its own (a
 * kill of the worker's process group spares it), holding the read end of a
 * pipe of which only the worker holds the write end: when it reads end of
 * file (the worker exited or died) it kills every slot's cgroup, waits for
 * them to empty, removes the folders and exits.
 * Folders whose worker and keeper are both gone (a kill of every process by
 * name) are removed by the next worker's open when they hold nothing.
 *
 * Where the machine does not offer it (no cgroup2 mount, our cgroup not
 * writable by this user, e.g. without systemd's Delegate=yes), or with
 * --no-cgroup, everything still works as before on process groups and the
 * subreaper; the worker's log says which and why. Not here: process groups
 * and the subreaper (pool.c, reaper.c). */
#ifndef WORKER_CGROUP_H
#define WORKER_CGROUP_H

#include <stddef.h>
#include <sys/types.h>

#define WORKER_CGROUP_PATH_MAX 4096

typedef struct worker_cgroup_s {
    int enabled;
    char dir[WORKER_CGROUP_PATH_MAX]; /* .../fitfarm-worker-PID */
    int keeper_fd;                    /* write end of the keeper's pipe; -1: none */
    int has_kill;                     /* cgroup.kill exists (else each process is signalled) */
} worker_cgroup_t;

/* Creates the worker's folder and starts the keeper. Returns 0 (enabled), or
 * -1 with why (the machine offers no usable cgroup v2; cg is then disabled
 * and every other call does nothing). Call before the worker becomes a
 * subreaper and before it opens sockets. */
int worker_cgroup_open(worker_cgroup_t *cg, char *why, size_t whylen);

/* worker_cgroup_open unless disabled (--no-cgroup), logging which way it
 * went and, without cgroups, why and what that leaves. */
void worker_cgroup_setup(worker_cgroup_t *cg, int disabled);

/* A descriptor open for writing slot's cgroup.procs (the folder is made on
 * first use), for the child to enter with worker_cgroup_enter; -1 when
 * disabled or on an error (logged). The caller closes it. */
int worker_cgroup_slot_fd(worker_cgroup_t *cg, unsigned slot);

/* In the child, right after fork: closes its copy of the keeper's pipe
 * (only the worker may hold it), moves the calling process into the slot
 * (writes "0" to slot_fd) and closes slot_fd. Returns 0, or -1 (logged, or
 * slot_fd was -1). Accepts a NULL or disabled cg. */
int worker_cgroup_enter(worker_cgroup_t *cg, int slot_fd);

/* SIGKILLs every process in slot's cgroup. Returns the processes listed
 * there when it started (0 when disabled or empty). */
unsigned worker_cgroup_kill_slot(worker_cgroup_t *cg, unsigned slot);

/* Kills every slot, removes the folders and lets the keeper go. Accepts a
 * disabled cg. */
void worker_cgroup_close(worker_cgroup_t *cg);

#endif
