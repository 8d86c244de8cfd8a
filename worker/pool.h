/* pool.h: the worker's pre-forked child processes. Internal to the worker.
 *
 * Owns: forking N children (each with a socketpair), handing jobs to
 * children (a small queue per child, sized from the measured evaluation time:
 * deep for trivial plugins so one context switch serves many jobs, one job for
 * slow ones), reading their outcomes, noticing a child's death or overrun and
 * turning it into a CRASHED or TIMEOUT outcome for the one job it was running,
 * handing the jobs it held but had not finished to a live child, killing (by
 * process group: each child leads its own) and respawning children, killing
 * what dead children's plugins left running (reaper.h), and reading each
 * child's stdout and stderr into a bounded log per evaluation (output.h). The worker never dies from a plugin: everything a
 * plugin can do ends as an outcome here. Not owned: which job runs next, the
 * network, credits (loop.c); the evaluation itself (child.c).
 *
 * Single-threaded; the caller polls the descriptors this module lists (one
 * zmq_poll together with the broker socket), then calls worker_pool_handle. */
#ifndef WORKER_POOL_H
#define WORKER_POOL_H

#include <stddef.h>
#include <stdint.h>
#include <zmq.h>

#include "msg.h"
#include "registry.h"

#define WORKER_POOL_MAX_SLOTS 1024u
#define WORKER_POOL_ITEMS (2u * WORKER_POOL_MAX_SLOTS) /* poll items: socket and output pipe */

typedef struct {
    unsigned slots;                /* children, 1..WORKER_POOL_MAX_SLOTS */
    const worker_registry_t *registry; /* borrowed; must outlive the pool */
    size_t mem_limit_mb;           /* address-space limit per child; 0 = none */
    uint32_t default_timeout_ms;   /* for jobs with timeout_ms 0; 0 = 3600 s */
    unsigned queue_depth;          /* jobs per child; 0 = adaptive (credits.h) */
    int nice;                      /* added to each child's nice value (0..19): plugins
                                      yield the CPU to the machine's other users */
    struct worker_cgroup_s *cgroup; /* slots' cgroups (cgroup.h); NULL = none */
    int reap_orphans;              /* the calling process is a child subreaper and starts
                                      no children of its own besides the pool's: kill
                                      and reap every other child after a child's death
                                      and at destroy (what plugins left, reaper.h) */
} worker_pool_config_t;

/* A finished job. outcome.fitness and outcome.error are malloc'd (error is
 * never NULL); release with worker_pool_result_clear. */
typedef struct {
    proto_outcome_t outcome;
    int64_t wall_us; /* the evaluation's wall time (from its start, not hand-over) */
} worker_pool_result_t;

typedef struct worker_pool worker_pool_t;

/* Forks the children. Returns the pool (caller destroys it), or NULL (logged)
 * if not one child could be started. Aborts on out of memory. */
worker_pool_t *worker_pool_new(const worker_pool_config_t *config);

/* SIGKILLs every child by PID, reaps them, frees the pool and its unread
 * results; sets *self_p to NULL. Accepts NULL. */
void worker_pool_destroy(worker_pool_t **self_p);

unsigned worker_pool_slots(const worker_pool_t *self);
/* Live children that can take another job now (their queue is not full). */
unsigned worker_pool_idle(const worker_pool_t *self);
/* Jobs the pool holds: running or queued in a child, or waiting for a child
 * after theirs died. */
unsigned worker_pool_busy(const worker_pool_t *self);
/* Jobs a child holds at most right now (the fixed or adaptive depth). */
unsigned worker_pool_depth(const worker_pool_t *self);

/* Hands job to the least loaded child with room (copies what it needs; job
 * stays the caller's). Returns 0, or -1 if no child has room. If the child
 * turns out dead, the job goes to its replacement; a job that cannot be
 * encoded ends as a CRASHED result. */
int worker_pool_start(worker_pool_t *self, const proto_job_t *job);

/* Writes the jobs handed over since the last call (one write per child, as
 * far as the sockets take them without blocking), then fills items with up
 * to two entries per live child: its socket (ZMQ_POLLIN, plus ZMQ_POLLOUT
 * while jobs wait to be written) and its output pipe (ZMQ_POLLIN), at most
 * max (WORKER_POOL_ITEMS holds them all). Returns the count. */
size_t worker_pool_pollitems(worker_pool_t *self, zmq_pollitem_t *items, size_t max);

/* After zmq_poll on items from worker_pool_pollitems: reads answers, writes
 * pending jobs, reaps dead children (respawning them), kills children whose
 * running evaluation is past its deadline. Also safe to call with n == 0
 * (only deadlines and respawns). */
void worker_pool_handle(worker_pool_t *self, const zmq_pollitem_t *items, size_t n);

/* Milliseconds until the next deadline or respawn attempt, or -1 if none.
 * A child may move on to its next job at any time, so this is a lower bound:
 * callers wake up, call worker_pool_handle and ask again. */
long worker_pool_timeout_ms(const worker_pool_t *self);

/* Finished results not yet taken. */
size_t worker_pool_ready(const worker_pool_t *self);

/* Pops one finished result into *out. Returns 1, or 0 if none is ready. */
int worker_pool_take(worker_pool_t *self, worker_pool_result_t *out);

/* Frees what a result owns. */
void worker_pool_result_clear(worker_pool_result_t *r);

/* Polls the children for up to timeout_ms (or until a result is ready) and
 * handles what arrived. Returns the number of results ready. For tests and
 * for simple callers that own no other socket. */
size_t worker_pool_wait(worker_pool_t *self, int timeout_ms);

/* SIGKILLs the children holding jobs (a forced stop). Their jobs produce no
 * results. */
void worker_pool_kill_busy(worker_pool_t *self);

/* The owner reclaimed the machine: SIGKILLs the children holding jobs, as
 * worker_pool_kill_busy, and starts new ones. Writes the ids of every job
 * the pool held and had not finished (at most max; worker_pool_busy() is
 * enough) into ids and returns the count: those jobs produce no results,
 * while results finished before the call are still taken as usual. */
size_t worker_pool_reclaim(worker_pool_t *self, uint64_t *ids, size_t max);

/* Forgets job_id: dropped if it waits for a child; if a child holds it, that
 * child is killed (with its process group) and replaced, and the other jobs
 * it held start again elsewhere. Reports nothing for it. 0, or -1 when the
 * pool does not hold it (finished: its result may still be unread). */
int worker_pool_cancel(worker_pool_t *self, uint64_t job_id);

#endif
