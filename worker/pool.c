/* pool.c: the pre-forked child processes (pool.h). Owns the children's
 * lifecycle: spawn, hand-over, answers, death, overrun, respawn; and which
 * job a death or an overrun belongs to.
 *
 * A child slot is dead (pid == 0: fork failed; worker_pool_handle retries each
 * second) or live. A live child holds a FIFO of jobs written (or about to be
 * written) to its socket: the child evaluates them in order, so answers come
 * back in that order and the head of the FIFO is the oldest job not answered.
 * How many it holds is the depth: config.queue_depth, or adaptive from the
 * median evaluation time the children report (credits.h), 1 until measured.
 *
 * Which job is running: the child publishes the sequence number and start time
 * of the job it evaluates in a status block shared with us (child.h). With
 * batched answers the head of the FIFO may be finished while a later job runs,
 * so answer order alone cannot say. The block is untrusted: a sequence number
 * that names no job we hold is ignored and the head is assumed to run, since
 * max(its hand-over, the last answer read); a start time is clamped to
 * [hand-over, now], so a deadline is never earlier than the job could have
 * started.
 *
 * Deaths and overruns: the running job (if any) becomes CRASHED (naming the
 * signal or exit status) or TIMEOUT; every other job the child held goes,
 * in order, to the pool's backlog and from there to the first child with room
 * (usually the respawned one), so it is evaluated once and reported once. A
 * death while no job was running blames nobody; a job that goes through
 * S_MAX_BLAMELESS such deaths becomes CRASHED, so a child that dies between
 * jobs every time cannot keep a job circling for ever. */
#include "pool.h"

#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <sys/resource.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "cgroup.h"
#include "child.h"
#include "common/alloc.h"
#include "common/clock.h"
#include "common/log.h"
#include "credits.h"
#include "frame.h"
#include "memnote.h"
#include "output.h"
#include "reaper.h"

#define S_RESPAWN_RETRY_MS 1000
#define S_REAP_GRACE_MS 2000 /* a child whose socket closed gets this long to be reapable */
#define S_STUCK_GRACE_US 1000000 /* a child running nothing while holding jobs, past
                                    the head's deadline by this much, is stuck */
#define S_MAX_BLAMELESS 3
#define S_MAX_DEPTH WORKER_CREDITS_CHILD_DEPTH_MAX

typedef struct {
    uint64_t job_id;
    uint64_t seq;      /* its number in its child's order (1, 2, ...); 0 in the backlog */
    uint32_t timeout_ms;
    unsigned blameless; /* deaths of a holding child while nothing ran */
    int64_t handed_us; /* when it was given to its current child */
    uint8_t *frame;    /* the encoded JOBS frame, kept to hand it over again */
    size_t frame_len;
} s_job_t;

typedef struct {
    pid_t pid; /* 0: dead */
    int fd;    /* parent's end of the socketpair, non-blocking; -1 when dead */
    int out_fd; /* read end of its stdout and stderr, non-blocking; -1: none or closed */
    worker_output_t output; /* what it printed, not yet logged */
    s_job_t q[S_MAX_DEPTH]; /* ring: [qhead, qhead + qn) */
    unsigned qhead, qn;
    uint64_t next_seq;      /* sequence number of the last job handed over */
    int64_t last_answer_us; /* when its last answer was read (or it started) */
    worker_frame_buf_t in, out;
} s_child_t;

struct worker_pool {
    worker_pool_config_t config;
    s_child_t *children;
    worker_child_status_t *status; /* shared with the children, one per slot */
    size_t status_bytes;
    worker_pool_result_t *results; /* FIFO: [head, count) */
    size_t head, count, cap;
    s_job_t *backlog; /* FIFO: [bhead, bcount): jobs whose child died */
    size_t bhead, bcount, bcap;
    worker_credits_t timing; /* evaluation times, for the adaptive depth */
    unsigned depth;
    int64_t respawn_at_ms; /* 0: no dead slot waiting */
};

static s_job_t *s_at(s_child_t *c, unsigned k)
{
    return &c->q[(c->qhead + k) % S_MAX_DEPTH];
}

/* SIGKILLs child i, its process group and its slot's cgroup (cgroup.h);
 * without cgroups, helpers that left the group are orphans the sweep finds. */
static void s_kill(worker_pool_t *self, unsigned i)
{
    const s_child_t *c = &self->children[i];
    if (c->pid <= 0)
        return;
    kill(-c->pid, SIGKILL);
    kill(c->pid, SIGKILL);
    (void)worker_cgroup_kill_slot(self->config.cgroup, i);
}

/* Kills and reaps every child of the worker that is not a live slot: what
 * dead children's plugins left, reparented to us (reaper.h). */
static void s_sweep(worker_pool_t *self, int budget_ms)
{
    if (!self->config.reap_orphans)
        return;
    pid_t keep[WORKER_POOL_MAX_SLOTS];
    size_t n = 0;
    for (unsigned i = 0; i < self->config.slots; i++)
        if (self->children[i].pid > 0)
            keep[n++] = self->children[i].pid;
    unsigned killed = worker_reaper_sweep(keep, n, budget_ms);
    if (killed)
        LOG_WARN("killed %u processes that plugins of dead children had left running", killed);
}

/* Who new output of child i belongs to: the job it runs, else the oldest it
 * holds, else nobody; what was kept for another job is logged first. */
static int s_running(const worker_pool_t *self, unsigned i, int64_t *start_us);

static void s_output_drain(worker_pool_t *self, unsigned i)
{
    s_child_t *c = &self->children[i];
    if (c->out_fd < 0)
        return;
    int64_t start_us;
    int k = s_running(self, i, &start_us);
    uint64_t owner = k >= 0 ? s_at(c, (unsigned)k)->job_id : c->qn ? s_at(c, 0)->job_id : 0;
    if (worker_output_read_for(&c->output, c->out_fd, owner)) {
        /* Every writer closed it: polling on would only see end of file. */
        close(c->out_fd);
        c->out_fd = -1;
    }
}

/* Logs what child i printed (the job it ends, or its death). */
static void s_output_end(worker_pool_t *self, unsigned i)
{
    s_child_t *c = &self->children[i];
    s_output_drain(self, i);
    worker_output_end(&c->output);
}

static void s_push(worker_pool_t *self, const worker_pool_result_t *r)
{
    self->results = common_xfifo_room(self->results, &self->head, &self->count, &self->cap,
                                sizeof *self->results, 16);
    self->results[self->count++] = *r;
}

static void s_push_failure(worker_pool_t *self, uint64_t job_id, int64_t start_us, int status,
                           const char *error, const struct rusage *ru)
{
    worker_pool_result_t r = {0};
    r.outcome.job_id = job_id;
    r.outcome.status = (uint32_t)status;
    r.outcome.error = common_xstrdup(error);
    if (ru) {
        r.outcome.peak_rss_kb = ru->ru_maxrss > 0 ? (uint64_t)ru->ru_maxrss : 0;
        r.outcome.cpu_seconds = (double)ru->ru_utime.tv_sec + ru->ru_utime.tv_usec * 1e-6 +
                                (double)ru->ru_stime.tv_sec + ru->ru_stime.tv_usec * 1e-6;
    }
    r.wall_us = common_clock_us() - start_us;
    worker_memnote_apply(&r.outcome, self->config.mem_limit_mb);
    s_push(self, &r);
}

static void s_backlog_push(worker_pool_t *self, const s_job_t *j)
{
    self->backlog = common_xfifo_room(self->backlog, &self->bhead, &self->bcount, &self->bcap,
                                sizeof *self->backlog, 64);
    self->backlog[self->bcount] = *j;
    self->backlog[self->bcount].seq = 0;
    self->bcount++;
}

static int s_has_room(const worker_pool_t *self, const s_child_t *c)
{
    return c->pid > 0 && c->qn < self->depth;
}

/* The live child with room holding the fewest jobs, or -1. */
static int s_pick(const worker_pool_t *self)
{
    int best = -1;
    for (unsigned i = 0; i < self->config.slots; i++) {
        const s_child_t *c = &self->children[i];
        if (s_has_room(self, c) && (best < 0 || c->qn < self->children[best].qn)) {
            best = (int)i;
            if (c->qn == 0)
                break;
        }
    }
    return best;
}

/* Gives j (its frame now the child's) to child i. A child that was waiting
 * for work gets it at once; otherwise the write waits for pollitems, so a
 * turn's jobs leave in one write. */
static void s_hand(worker_pool_t *self, unsigned i, const s_job_t *j)
{
    s_child_t *c = &self->children[i];
    s_job_t *slot = s_at(c, c->qn);
    *slot = *j;
    slot->seq = ++c->next_seq;
    slot->handed_us = common_clock_us();
    if (worker_frame_buf_append(&c->out, j->frame, j->frame_len) != 0) {
        LOG_ERROR("out of memory for a job frame");
        abort();
    }
    c->qn++;
    if (c->qn == 1)
        (void)worker_frame_flush(&c->out, c->fd, 0); /* a dead child shows as end of file */
}

static void s_drain_backlog(worker_pool_t *self)
{
    while (self->bhead < self->bcount) {
        int i = s_pick(self);
        if (i < 0)
            return;
        s_hand(self, (unsigned)i, &self->backlog[self->bhead++]);
    }
    self->bhead = self->bcount = 0;
}

/* Closes a slot whose process has been reaped: its socket and output pipe,
 * and what was half read or written on them. */
static void s_close_slot(s_child_t *c)
{
    if (c->fd >= 0)
        close(c->fd);
    if (c->out_fd >= 0)
        close(c->out_fd);
    c->fd = c->out_fd = -1;
    c->pid = 0;
    c->in.pos = c->in.len = 0;
    c->out.pos = c->out.len = 0;
}

static void s_nonblock(int fd, unsigned i, const char *what)
{
    int fl = fcntl(fd, F_GETFL);
    if (fl < 0 || fcntl(fd, F_SETFL, fl | O_NONBLOCK) != 0)
        LOG_WARN("cannot make child %u's %s non-blocking: %s", i, what, strerror(errno));
}

static int s_spawn(worker_pool_t *self, unsigned i)
{
    s_child_t *c = &self->children[i];
    worker_child_status_t *st = &self->status[i];
    atomic_store(&st->running, 0);
    atomic_store(&st->start_us, 0);
    int sv[2], op[2];
    if (socketpair(AF_UNIX, SOCK_STREAM | SOCK_CLOEXEC, 0, sv) != 0) {
        LOG_ERROR("socketpair for child %u failed: %s", i, strerror(errno));
        goto fail;
    }
    if (pipe2(op, O_CLOEXEC) != 0) {
        LOG_ERROR("output pipe for child %u failed: %s", i, strerror(errno));
        close(sv[0]);
        close(sv[1]);
        goto fail;
    }
    int cg_fd = worker_cgroup_slot_fd(self->config.cgroup, i);
    pid_t parent = getpid();
    pid_t pid = fork();
    if (pid < 0) {
        LOG_ERROR("fork of child %u failed: %s", i, strerror(errno));
        close(sv[0]);
        close(sv[1]);
        close(op[0]);
        close(op[1]);
        (void)(cg_fd >= 0 && close(cg_fd));
        goto fail;
    }
    if (pid == 0) {
        /* Other children's sockets must not stay open here, or their deaths
         * would not read as end of file in the parent. */
        for (unsigned j = 0; j < self->config.slots; j++)
            if (j != i)
                s_close_slot(&self->children[j]); /* this process's copies only */
        close(sv[0]);
        close(op[0]);
        (void)worker_cgroup_enter(self->config.cgroup, cg_fd); /* before any plugin code */
        worker_child_enter(sv[1], op[1], self->config.nice, self->config.registry,
                           self->config.mem_limit_mb, parent, st);
    }
    /* The child does the same; whichever runs first, the group exists before
     * anything is killed through it. */
    (void)setpgid(pid, pid);
    if (cg_fd >= 0)
        close(cg_fd);
    close(sv[1]);
    close(op[1]);
    c->out_fd = op[0];
    c->output.len = 0;
    c->output.cut = 0;
    c->output.job_id = 0;
    c->output.child = (int)i;
    /* Non-blocking: a child busy with a long evaluation must never stall the
     * parent's write of the jobs queued behind it, nor its output reads. */
    s_nonblock(op[0], i, "output pipe");
    s_nonblock(sv[0], i, "socket");
    c->pid = pid;
    c->fd = sv[0];
    c->next_seq = 0;
    c->last_answer_us = common_clock_us();
    LOG_DEBUG("child %u started as pid %d", i, (int)pid);
    return 0;
fail:
    c->pid = 0;
    c->fd = -1;
    if (!self->respawn_at_ms)
        self->respawn_at_ms = common_clock_ms() + S_RESPAWN_RETRY_MS;
    return -1;
}

/* Which of child i's jobs is running (index into its FIFO), and since when;
 * -1 if the status block says none. See the top of the file for trust. */
static int s_running(const worker_pool_t *self, unsigned i, int64_t *start_us)
{
    s_child_t *c = (s_child_t *)&self->children[i];
    worker_child_status_t *st = &self->status[i];
    if (c->qn == 0)
        return -1;
    uint64_t seq = 0;
    int64_t start = 0;
    int consistent = 0;
    for (int tries = 0; tries < 4 && !consistent; tries++) {
        seq = atomic_load_explicit(&st->running, memory_order_acquire);
        start = atomic_load_explicit(&st->start_us, memory_order_relaxed);
        consistent = atomic_load_explicit(&st->running, memory_order_acquire) == seq;
    }
    if (consistent && seq == 0)
        return -1;
    uint64_t first = s_at(c, 0)->seq;
    int64_t now = common_clock_us();
    if (consistent && seq >= first && seq - first < c->qn) {
        const s_job_t *j = s_at(c, (unsigned)(seq - first));
        if (start < j->handed_us)
            start = j->handed_us;
        if (start > now)
            start = now;
        *start_us = start;
        return (int)(seq - first);
    }
    /* Not believable: the head runs, since it could have started. */
    const s_job_t *h = s_at(c, 0);
    *start_us = h->handed_us > c->last_answer_us ? h->handed_us : c->last_answer_us;
    return 0;
}

/* Empties child i's FIFO: job k (if >= 0) is the caller's business; the others
 * go to the backlog. blameless: nothing ran, so each gets a strike. */
static void s_requeue_all(worker_pool_t *self, unsigned i, int k, int blameless,
                          const char *why)
{
    s_child_t *c = &self->children[i];
    for (unsigned n = 0; n < c->qn; n++) {
        s_job_t *j = s_at(c, n);
        if ((int)n == k)
            continue;
        if (blameless && ++j->blameless >= S_MAX_BLAMELESS) {
            char text[PROTO_MAX_ERROR_BYTES];
            snprintf(text, sizeof text,
                     "the child process holding this job died %u times between evaluations "
                     "(last: %s)",
                     j->blameless, why);
            LOG_WARN("job %llu: %s", (unsigned long long)j->job_id, text);
            s_push_failure(self, j->job_id, j->handed_us, PROTO_STATUS_CRASHED, text, NULL);
            free(j->frame);
            continue;
        }
        s_backlog_push(self, j);
    }
    c->qn = 0;
    c->qhead = 0;
}

/* Closes the slot after its process has been reaped and starts a new one;
 * its jobs must have been moved out. */
static void s_respawn(worker_pool_t *self, unsigned i)
{
    s_close_slot(&self->children[i]);
    s_sweep(self, 1000);
    s_spawn(self, i);
}

/* The child's socket closed or broke, or it answered nonsense (then why says
 * so and it has been SIGKILLed): it died. */
static void s_on_death(worker_pool_t *self, unsigned i, const char *why)
{
    s_child_t *c = &self->children[i];
    int64_t start_us = 0;
    int k = s_running(self, i, &start_us); /* read before the slot is reused */
    struct rusage ru = {0};
    int status = worker_reaper_wait(c->pid, S_REAP_GRACE_MS, &ru);
    /* Its helpers in its group must not outlive it (the group id stays
     * taken while any member lives, so this cannot hit a stranger), nor
     * anything in its cgroup. */
    kill(-c->pid, SIGKILL);
    (void)worker_cgroup_kill_slot(self->config.cgroup, i);
    s_output_end(self, i);
    char text[PROTO_MAX_ERROR_BYTES];
    worker_reaper_describe(status, text, sizeof text);
    if (why)
        snprintf(text + strlen(text), sizeof text - strlen(text), " (%s)", why);
    if (k >= 0) {
        s_job_t *j = s_at(c, (unsigned)k);
        LOG_WARN("job %llu: child pid %d: %s; respawning (%u other jobs it held go to "
                 "another child)",
                 (unsigned long long)j->job_id, (int)c->pid, text, c->qn - 1);
        s_push_failure(self, j->job_id, start_us, PROTO_STATUS_CRASHED, text, &ru);
        free(j->frame);
    } else if (c->qn == 0 && WIFEXITED(status) && WEXITSTATUS(status) == 0) {
        LOG_INFO("idle child pid %d exited; respawning", (int)c->pid);
    } else {
        LOG_WARN("child pid %d ended between evaluations: %s; respawning (%u jobs it held go "
                 "to another child)",
                 (int)c->pid, text, c->qn);
    }
    s_requeue_all(self, i, k, k < 0, text);
    s_respawn(self, i);
}

/* SIGKILLs child i and reaps it (its usage into ru, which may be NULL),
 * logging what it printed, read before the kill so that it goes to the job
 * it ran. The slot stays dead until s_respawn. */
static void s_kill_reap(worker_pool_t *self, unsigned i, struct rusage *ru)
{
    s_child_t *c = &self->children[i];
    s_output_drain(self, i);
    s_kill(self, i);
    int status = 0;
    while (wait4(c->pid, &status, 0, ru) < 0 && errno == EINTR)
        ;
    s_output_end(self, i);
}

/* Kills child i, whose job k (started at start_us) overran. */
static void s_on_overrun(worker_pool_t *self, unsigned i, int k, int64_t start_us)
{
    s_child_t *c = &self->children[i];
    struct rusage ru = {0};
    s_kill_reap(self, i, &ru);
    s_job_t *j = s_at(c, (unsigned)k);
    char text[128];
    snprintf(text, sizeof text, "evaluation exceeded %g s", j->timeout_ms / 1000.0);
    LOG_WARN("job %llu: %s; child pid %d killed, respawning", (unsigned long long)j->job_id,
             text, (int)c->pid);
    s_push_failure(self, j->job_id, start_us, PROTO_STATUS_TIMEOUT, text, &ru);
    free(j->frame);
    s_requeue_all(self, i, k, 0, text);
    s_respawn(self, i);
}

/* Replaces child i after an answer showed it near its address-space limit
 * (leaks, fragmentation) rather than fail the next, innocent job; its other
 * jobs go to another child, without a strike. */
static void s_retire(worker_pool_t *self, unsigned i)
{
    s_kill_reap(self, i, NULL);
    s_requeue_all(self, i, -1, 0, "replaced");
    s_respawn(self, i);
}

static void s_on_answer(worker_pool_t *self, unsigned i, proto_msg_t *msg, uint64_t side,
                        int *retire)
{
    s_child_t *c = &self->children[i];
    s_job_t *j = s_at(c, 0);
    worker_pool_result_t r = {0};
    r.outcome = msg->u.done.outcomes[0];
    /* Take ownership of the strings; the message frees nothing it lost. */
    msg->u.done.outcomes[0].fitness = NULL;
    msg->u.done.outcomes[0].error = NULL;
    if (!r.outcome.error)
        r.outcome.error = common_xstrdup("");
    int64_t now = common_clock_us();
    /* The child's own measure; it cannot have run longer than it has had the job. */
    int64_t most = now - j->handed_us;
    r.wall_us = side > (uint64_t)(most < 0 ? 0 : most) ? most : (int64_t)side;
    worker_credits_eval(&self->timing, r.wall_us);
    if (c->output.job_id == j->job_id)
        worker_output_flush(&c->output);
    free(j->frame);
    c->qhead = (c->qhead + 1) % S_MAX_DEPTH;
    c->qn--;
    c->last_answer_us = now;
    uint64_t limit_kb = (uint64_t)self->config.mem_limit_mb * 1024u;
    if (limit_kb && r.outcome.peak_rss_kb >= limit_kb / 4u * 3u && !*retire) {
        LOG_INFO("child pid %d peaked at %llu kB of its %llu kB limit; replacing it",
                 (int)c->pid, (unsigned long long)r.outcome.peak_rss_kb,
                 (unsigned long long)limit_kb);
        *retire = 1;
    }
    worker_memnote_apply(&r.outcome, self->config.mem_limit_mb);
    s_push(self, &r);
}

static void s_update_depth(worker_pool_t *self)
{
    unsigned d = self->config.queue_depth ? self->config.queue_depth
                                          : worker_credits_child_depth(&self->timing);
    self->depth = d < 1 ? 1 : d > S_MAX_DEPTH ? S_MAX_DEPTH : d;
}

static void s_on_readable(worker_pool_t *self, unsigned i)
{
    s_child_t *c = &self->children[i];
    /* What a job printed is in the pipe before its answer is in the socket. */
    s_output_drain(self, i);
    ssize_t got = worker_frame_fill(&c->in, c->fd, MSG_DONTWAIT);
    if (got < 0 && (errno == EAGAIN || errno == EWOULDBLOCK))
        return;
    int retire = 0;
    size_t answers = 0;
    for (;;) {
        proto_msg_t *msg = NULL;
        uint64_t side = 0;
        char err[256];
        int rc = worker_frame_next(&c->in, &msg, &side, err, sizeof err);
        if (rc == 0)
            break;
        if (rc == 1 && (c->qn == 0 || msg->type != PROTO_DONE ||
                        msg->u.done.n_outcomes != 1 ||
                        msg->u.done.outcomes[0].job_id != s_at(c, 0)->job_id)) {
            if (c->qn == 0)
                snprintf(err, sizeof err, "an answer while it held no job");
            else
                snprintf(err, sizeof err, "answer is not one outcome for job %llu",
                         (unsigned long long)s_at(c, 0)->job_id);
            rc = -1;
        }
        if (rc < 0) {
            proto_msg_destroy(&msg);
            s_kill(self, i);
            char why[300];
            snprintf(why, sizeof why, "bad answer from the child: %s", err);
            s_on_death(self, i, why);
            return;
        }
        s_on_answer(self, i, msg, side, &retire);
        proto_msg_destroy(&msg);
        answers++;
    }
    if (answers)
        s_update_depth(self);
    if (got <= 0) {
        s_on_death(self, i, NULL); /* end of file (or a broken socket) */
        return;
    }
    if (retire)
        s_retire(self, i);
}

worker_pool_t *worker_pool_new(const worker_pool_config_t *config)
{
    if (config->slots < 1 || config->slots > WORKER_POOL_MAX_SLOTS || !config->registry) {
        LOG_ERROR("pool needs 1 to %u slots and a plugin registry", WORKER_POOL_MAX_SLOTS);
        return NULL;
    }
    worker_pool_t *self = common_xcalloc(1, sizeof *self);
    self->config = *config;
    if (!self->config.default_timeout_ms)
        self->config.default_timeout_ms = 3600u * 1000u;
    worker_credits_init(&self->timing, config->slots);
    s_update_depth(self);
    self->children = common_xcalloc(config->slots, sizeof *self->children);
    for (unsigned i = 0; i < config->slots; i++)
        self->children[i].fd = self->children[i].out_fd = -1;
    /* Shared with the children: mapped once, before any fork. */
    self->status_bytes = config->slots * sizeof *self->status;
    void *map = mmap(NULL, self->status_bytes, PROT_READ | PROT_WRITE,
                     MAP_SHARED | MAP_ANONYMOUS, -1, 0);
    if (map == MAP_FAILED) {
        LOG_ERROR("cannot map the children's status blocks: %s", strerror(errno));
        free(self->children);
        free(self);
        return NULL;
    }
    self->status = map;
    unsigned live = 0;
    for (unsigned i = 0; i < config->slots; i++)
        live += s_spawn(self, i) == 0;
    if (live == 0) {
        worker_pool_destroy(&self);
        return NULL;
    }
    return self;
}

static void s_drop_jobs(s_child_t *c)
{
    for (unsigned n = 0; n < c->qn; n++)
        free(s_at(c, n)->frame);
    c->qn = 0;
    c->qhead = 0;
}

void worker_pool_destroy(worker_pool_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    worker_pool_t *self = *self_p;
    for (unsigned i = 0; i < self->config.slots; i++) {
        s_child_t *c = &self->children[i];
        if (c->pid > 0) {
            s_kill_reap(self, i, NULL);
            c->pid = 0;
        }
        if (c->fd >= 0)
            close(c->fd);
        if (c->out_fd >= 0)
            close(c->out_fd);
        s_drop_jobs(c);
        worker_frame_buf_free(&c->in);
        worker_frame_buf_free(&c->out);
    }
    /* No child is kept now: whatever plugins left running goes too. */
    s_sweep(self, 2000);
    for (size_t i = self->bhead; i < self->bcount; i++)
        free(self->backlog[i].frame);
    free(self->backlog);
    for (size_t i = self->head; i < self->count; i++)
        worker_pool_result_clear(&self->results[i]);
    free(self->results);
    free(self->children);
    if (self->status)
        munmap(self->status, self->status_bytes);
    free(self);
    *self_p = NULL;
}

unsigned worker_pool_slots(const worker_pool_t *self)
{
    return self->config.slots;
}

unsigned worker_pool_depth(const worker_pool_t *self)
{
    return self->depth;
}

unsigned worker_pool_idle(const worker_pool_t *self)
{
    unsigned n = 0;
    for (unsigned i = 0; i < self->config.slots; i++)
        n += s_has_room(self, &self->children[i]);
    return n;
}

unsigned worker_pool_busy(const worker_pool_t *self)
{
    size_t n = self->bcount - self->bhead;
    for (unsigned i = 0; i < self->config.slots; i++)
        n += self->children[i].qn;
    return (unsigned)n;
}

int worker_pool_start(worker_pool_t *self, const proto_job_t *job)
{
    s_drain_backlog(self);
    if (self->bhead < self->bcount)
        return -1;
    int i = s_pick(self);
    if (i < 0)
        return -1;
    proto_msg_t msg = {.type = PROTO_JOBS};
    msg.u.jobs.n_jobs = 1;
    msg.u.jobs.jobs = (proto_job_t *)job; /* the encoder only reads it */
    s_job_t j = {.job_id = job->job_id,
                 .timeout_ms = job->timeout_ms ? job->timeout_ms
                                               : self->config.default_timeout_ms};
    if (worker_frame_encode(&msg, 0, &j.frame, &j.frame_len) != 0) {
        s_push_failure(self, job->job_id, common_clock_us(), PROTO_STATUS_CRASHED,
                       "could not hand the job to a child process (it does not encode "
                       "into one frame)",
                       NULL);
        return 0;
    }
    s_hand(self, (unsigned)i, &j);
    return 0;
}

size_t worker_pool_pollitems(worker_pool_t *self, zmq_pollitem_t *items, size_t max)
{
    size_t n = 0;
    for (unsigned i = 0; i < self->config.slots && n < max; i++) {
        s_child_t *c = &self->children[i];
        if (c->pid <= 0)
            continue;
        if (worker_frame_buf_pending(&c->out))
            (void)worker_frame_flush(&c->out, c->fd, 0); /* a dead child shows as end of file */
        items[n].socket = NULL;
        items[n].fd = c->fd;
        items[n].events = ZMQ_POLLIN;
        if (worker_frame_buf_pending(&c->out))
            items[n].events |= ZMQ_POLLOUT;
        items[n].revents = 0;
        n++;
        if (c->out_fd >= 0 && n < max)
            items[n++] = (zmq_pollitem_t){.fd = c->out_fd, .events = ZMQ_POLLIN};
    }
    return n;
}

/* Deadline of child i's running job (absolute, microseconds), or INT64_MAX;
 * *k and *start_us say which job and since when (*k < 0: none runs). */
static int64_t s_deadline(const worker_pool_t *self, unsigned i, int *k, int64_t *start_us)
{
    const s_child_t *c = &self->children[i];
    *k = -1;
    if (c->pid <= 0 || c->qn == 0)
        return INT64_MAX;
    *k = s_running(self, i, start_us);
    if (*k >= 0)
        return *start_us + (int64_t)s_at((s_child_t *)c, (unsigned)*k)->timeout_ms * 1000;
    /* Nothing runs, yet it holds jobs: it is between two, or stuck there. */
    const s_job_t *h = s_at((s_child_t *)c, 0);
    int64_t since = h->handed_us > c->last_answer_us ? h->handed_us : c->last_answer_us;
    *start_us = since;
    return since + (int64_t)h->timeout_ms * 1000 + S_STUCK_GRACE_US;
}

void worker_pool_handle(worker_pool_t *self, const zmq_pollitem_t *items, size_t n)
{
    for (size_t m = 0; m < n; m++) {
        if (!(items[m].revents & (ZMQ_POLLIN | ZMQ_POLLERR | ZMQ_POLLOUT)))
            continue;
        for (unsigned i = 0; i < self->config.slots; i++) {
            s_child_t *c = &self->children[i];
            if (c->pid > 0 && c->out_fd >= 0 && c->out_fd == items[m].fd) {
                s_output_drain(self, i);
                break;
            }
            if (c->pid <= 0 || c->fd != items[m].fd)
                continue;
            if ((items[m].revents & ZMQ_POLLOUT) && worker_frame_buf_pending(&c->out))
                (void)worker_frame_flush(&c->out, c->fd, 0);
            if (items[m].revents & (ZMQ_POLLIN | ZMQ_POLLERR))
                s_on_readable(self, i);
            break;
        }
    }
    int64_t now = common_clock_us();
    for (unsigned i = 0; i < self->config.slots; i++) {
        int k;
        int64_t start_us = 0;
        if (now < s_deadline(self, i, &k, &start_us))
            continue;
        if (k >= 0) {
            s_on_overrun(self, i, k, start_us);
        } else {
            s_kill(self, i);
            s_on_death(self, i, "stuck between evaluations");
        }
    }
    if (self->respawn_at_ms && common_clock_ms() >= self->respawn_at_ms) {
        self->respawn_at_ms = 0;
        for (unsigned i = 0; i < self->config.slots; i++)
            if (self->children[i].pid == 0)
                s_spawn(self, i);
    }
    s_drain_backlog(self);
}

long worker_pool_timeout_ms(const worker_pool_t *self)
{
    int64_t now = common_clock_us();
    int64_t next = self->respawn_at_ms ? self->respawn_at_ms * 1000 : INT64_MAX;
    for (unsigned i = 0; i < self->config.slots; i++) {
        const s_child_t *c = &self->children[i];
        int k;
        int64_t start_us;
        int64_t d = s_deadline(self, i, &k, &start_us);
        if (d < next)
            next = d;
        /* Jobs behind the running one start no earlier than now. */
        for (unsigned m = (unsigned)(k < 0 ? 0 : k + 1); c->pid > 0 && m < c->qn; m++) {
            int64_t later = now + (int64_t)c->q[(c->qhead + m) % S_MAX_DEPTH].timeout_ms * 1000;
            if (later < next)
                next = later;
        }
    }
    if (self->bhead < self->bcount && next > now)
        next = now; /* jobs wait for a child with room: come back soon */
    if (next == INT64_MAX)
        return -1;
    int64_t left = (next - now + 999) / 1000;
    return left < 0 ? 0 : (long)left;
}

size_t worker_pool_ready(const worker_pool_t *self)
{
    return self->count - self->head;
}

int worker_pool_take(worker_pool_t *self, worker_pool_result_t *out)
{
    if (self->head == self->count)
        return 0;
    *out = self->results[self->head++];
    if (self->head == self->count)
        self->head = self->count = 0;
    return 1;
}


/* SIGKILLs and reaps child i and forgets the jobs it held, appending their
 * ids to ids (while n < max; ids may be NULL). Its slot is left dead. */
static void s_stop_child(worker_pool_t *self, unsigned i, uint64_t *ids, size_t max, size_t *n)
{
    s_child_t *c = &self->children[i];
    s_kill_reap(self, i, NULL);
    for (unsigned k = 0; ids && k < c->qn && *n < max; k++)
        ids[(*n)++] = s_at(c, k)->job_id;
    s_drop_jobs(c);
    s_close_slot(c);
}

/* Stops every child holding jobs and empties the backlog (ids as above);
 * respawn: start new children in the stopped slots. */
static size_t s_stop_busy(worker_pool_t *self, uint64_t *ids, size_t max, int respawn)
{
    size_t n = 0;
    for (unsigned i = 0; i < self->config.slots; i++) {
        s_child_t *c = &self->children[i];
        if (c->pid > 0 && c->qn > 0) {
            s_stop_child(self, i, ids, max, &n);
            if (respawn)
                s_respawn(self, i);
        }
    }
    for (size_t i = self->bhead; i < self->bcount; i++) {
        if (ids && n < max)
            ids[n++] = self->backlog[i].job_id;
        free(self->backlog[i].frame);
    }
    self->bhead = self->bcount = 0;
    s_sweep(self, 2000);
    return n;
}

void worker_pool_kill_busy(worker_pool_t *self)
{
    (void)s_stop_busy(self, NULL, 0, 0);
}

size_t worker_pool_reclaim(worker_pool_t *self, uint64_t *ids, size_t max)
{
    return s_stop_busy(self, ids, max, 1);
}

int worker_pool_cancel(worker_pool_t *self, uint64_t job_id)
{
    for (size_t b = self->bhead; b < self->bcount; b++) {
        if (self->backlog[b].job_id != job_id)
            continue;
        free(self->backlog[b].frame);
        memmove(&self->backlog[b], &self->backlog[b + 1],
                (self->bcount - b - 1) * sizeof *self->backlog);
        self->bcount--;
        return 0;
    }
    for (unsigned i = 0; i < self->config.slots; i++) {
        s_child_t *c = &self->children[i];
        for (unsigned k = 0; c->pid > 0 && k < c->qn; k++) {
            s_job_t *j = s_at(c, k);
            if (j->job_id != job_id)
                continue;
            /* Its frame may be in the child's socket already: only a kill
             * takes it back. The child's other jobs go on elsewhere. */
            s_kill_reap(self, i, NULL);
            LOG_INFO("job %llu cancelled: child pid %d killed, respawning",
                     (unsigned long long)job_id, (int)c->pid);
            free(j->frame);
            s_requeue_all(self, i, (int)k, 0, "cancelled");
            s_respawn(self, i);
            return 0;
        }
    }
    return -1;
}
