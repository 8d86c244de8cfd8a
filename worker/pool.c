/* pool.c: the pre-forked child processes (pool.h). Owns the children's
 * lifecycle: spawn, hand-over, answer, death, overrun, respawn.
 *
 * A child slot is in one of three states:
 *   dead  pid == 0        fork failed; worker_pool_handle retries each second
 *   idle  pid, !busy      waiting on its socketpair for a job
 *   busy  pid, busy       running job_id until deadline_ms
 * worker_pool_start moves idle -> busy; s_on_answer busy -> idle; s_on_death
 * and s_on_overrun busy/idle -> (respawned) idle, producing CRASHED/TIMEOUT
 * for a busy child. */
#include "pool.h"

#include <errno.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/socket.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "child.h"
#include "common/alloc.h"
#include "common/clock.h"
#include "common/log.h"
#include "frame.h"

#define S_RESPAWN_RETRY_MS 1000
#define S_REAP_GRACE_MS 2000 /* a child whose socket closed gets this long to be reapable */

typedef struct {
    pid_t pid; /* 0: dead */
    int fd;    /* parent's end of the socketpair; -1 when dead */
    int busy;
    uint64_t job_id;
    int64_t start_us;
    int64_t deadline_ms;
    uint32_t timeout_ms;
} s_child_t;

struct worker_pool {
    worker_pool_config_t config;
    s_child_t *children;
    worker_pool_result_t *results; /* FIFO: [head, count) */
    size_t head, count, cap;
    int64_t respawn_at_ms; /* 0: no dead slot waiting */
};

static void s_push(worker_pool_t *self, const worker_pool_result_t *r)
{
    if (self->head > 0 && self->count == self->cap) {
        memmove(self->results, self->results + self->head,
                (self->count - self->head) * sizeof *self->results);
        self->count -= self->head;
        self->head = 0;
    }
    if (self->count == self->cap) {
        self->cap = self->cap ? self->cap * 2 : 16;
        self->results = common_xrealloc(self->results, self->cap, sizeof *self->results);
    }
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
    s_push(self, &r);
}

static int s_spawn(worker_pool_t *self, unsigned i)
{
    s_child_t *c = &self->children[i];
    int sv[2];
    if (socketpair(AF_UNIX, SOCK_STREAM | SOCK_CLOEXEC, 0, sv) != 0) {
        LOG_ERROR("socketpair for child %u failed: %s", i, strerror(errno));
        goto fail;
    }
    pid_t parent = getpid();
    pid_t pid = fork();
    if (pid < 0) {
        LOG_ERROR("fork of child %u failed: %s", i, strerror(errno));
        close(sv[0]);
        close(sv[1]);
        goto fail;
    }
    if (pid == 0) {
        /* Other children's sockets must not stay open here, or their deaths
         * would not read as end of file in the parent. */
        for (unsigned j = 0; j < self->config.slots; j++)
            if (j != i && self->children[j].fd >= 0)
                close(self->children[j].fd);
        close(sv[0]);
        worker_child_run(sv[1], self->config.registry, self->config.mem_limit_mb, parent);
    }
    close(sv[1]);
    c->pid = pid;
    c->fd = sv[0];
    c->busy = 0;
    LOG_DEBUG("child %u started as pid %d", i, (int)pid);
    return 0;
fail:
    c->pid = 0;
    c->fd = -1;
    c->busy = 0;
    if (!self->respawn_at_ms)
        self->respawn_at_ms = common_clock_ms() + S_RESPAWN_RETRY_MS;
    return -1;
}

/* Waits for a child that is exiting (its socket closed) and returns its
 * status; SIGKILLs it if it lingers past the grace period. */
static int s_reap(pid_t pid, struct rusage *ru)
{
    int status = 0;
    int64_t until = common_clock_ms() + S_REAP_GRACE_MS;
    for (;;) {
        pid_t r = wait4(pid, &status, WNOHANG, ru);
        if (r == pid)
            return status;
        if (r < 0 && errno != EINTR)
            return 0;
        if (common_clock_ms() >= until)
            break;
        struct timespec ts = {0, 2 * 1000 * 1000};
        nanosleep(&ts, NULL);
    }
    kill(pid, SIGKILL);
    while (wait4(pid, &status, 0, ru) < 0 && errno == EINTR)
        ;
    return status;
}

static void s_describe_status(int status, char *out, size_t outlen)
{
    if (WIFSIGNALED(status)) {
        int sig = WTERMSIG(status);
        const char *abbrev = sigabbrev_np(sig);
        snprintf(out, outlen, "evaluation killed by signal %d (SIG%s)", sig,
                 abbrev ? abbrev : "?");
    } else if (WIFEXITED(status)) {
        snprintf(out, outlen, "evaluation ended its process with exit status %d",
                 WEXITSTATUS(status));
    } else {
        snprintf(out, outlen, "evaluation process ended (wait status %#x)", (unsigned)status);
    }
}

/* Closes the slot after its process has been reaped and starts a new one. */
static void s_respawn(worker_pool_t *self, unsigned i)
{
    s_child_t *c = &self->children[i];
    if (c->fd >= 0)
        close(c->fd);
    c->fd = -1;
    c->pid = 0;
    c->busy = 0;
    s_spawn(self, i);
}

/* The child's socket closed or broke: it died. */
static void s_on_death(worker_pool_t *self, unsigned i, const char *why)
{
    s_child_t *c = &self->children[i];
    struct rusage ru = {0};
    int status = s_reap(c->pid, &ru);
    if (c->busy) {
        char text[PROTO_MAX_ERROR_BYTES];
        s_describe_status(status, text, sizeof text);
        if (why)
            snprintf(text + strlen(text), sizeof text - strlen(text), " (%s)", why);
        LOG_WARN("job %llu: child pid %d: %s; respawning", (unsigned long long)c->job_id,
                 (int)c->pid, text);
        s_push_failure(self, c->job_id, c->start_us, PROTO_STATUS_CRASHED, text, &ru);
    } else if (WIFEXITED(status) && WEXITSTATUS(status) == 0) {
        LOG_INFO("idle child pid %d exited; respawning", (int)c->pid);
    } else {
        char text[PROTO_MAX_ERROR_BYTES];
        s_describe_status(status, text, sizeof text);
        LOG_WARN("idle child pid %d ended: %s; respawning", (int)c->pid, text);
    }
    s_respawn(self, i);
}

static void s_on_overrun(worker_pool_t *self, unsigned i)
{
    s_child_t *c = &self->children[i];
    kill(c->pid, SIGKILL);
    struct rusage ru = {0};
    int status = 0;
    while (wait4(c->pid, &status, 0, &ru) < 0 && errno == EINTR)
        ;
    char text[128];
    snprintf(text, sizeof text, "evaluation exceeded %g s", c->timeout_ms / 1000.0);
    LOG_WARN("job %llu: %s; child pid %d killed, respawning", (unsigned long long)c->job_id,
             text, (int)c->pid);
    s_push_failure(self, c->job_id, c->start_us, PROTO_STATUS_TIMEOUT, text, &ru);
    s_respawn(self, i);
}

static void s_on_readable(worker_pool_t *self, unsigned i)
{
    s_child_t *c = &self->children[i];
    if (!c->busy) {
        /* Idle children never speak: this is end of file. */
        s_on_death(self, i, NULL);
        return;
    }
    proto_msg_t *msg = NULL;
    char err[256];
    int rc = worker_frame_read(c->fd, &msg, err, sizeof err);
    if (rc == 1) {
        s_on_death(self, i, NULL);
        return;
    }
    if (rc < 0 || msg->type != PROTO_DONE || msg->u.done.n_outcomes != 1 ||
        msg->u.done.outcomes[0].job_id != c->job_id) {
        if (rc == 0)
            snprintf(err, sizeof err, "answer is not one outcome for job %llu",
                     (unsigned long long)c->job_id);
        proto_msg_destroy(&msg);
        kill(c->pid, SIGKILL);
        char why[300];
        snprintf(why, sizeof why, "bad answer from the child: %s", err);
        s_on_death(self, i, why);
        return;
    }
    worker_pool_result_t r = {0};
    r.outcome = msg->u.done.outcomes[0];
    /* Take ownership of the strings; the message frees nothing it lost. */
    msg->u.done.outcomes[0].fitness = NULL;
    msg->u.done.outcomes[0].error = NULL;
    if (!r.outcome.error)
        r.outcome.error = common_xstrdup("");
    r.wall_us = common_clock_us() - c->start_us;
    proto_msg_destroy(&msg);
    c->busy = 0;
    /* A child that came close to its address-space limit may keep a full heap
     * (leaks, fragmentation): replace it now rather than fail the next,
     * innocent job. Decided here, not in the child, so no job is ever handed
     * to a child that is about to leave. */
    uint64_t limit_kb = (uint64_t)self->config.mem_limit_mb * 1024u;
    if (limit_kb && r.outcome.peak_rss_kb >= limit_kb / 4u * 3u) {
        LOG_INFO("child pid %d peaked at %llu kB of its %llu kB limit; replacing it",
                 (int)c->pid, (unsigned long long)r.outcome.peak_rss_kb,
                 (unsigned long long)limit_kb);
        kill(c->pid, SIGKILL);
        while (waitpid(c->pid, NULL, 0) < 0 && errno == EINTR)
            ;
        s_respawn(self, i);
    }
    s_push(self, &r);
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
    self->children = common_xcalloc(config->slots, sizeof *self->children);
    for (unsigned i = 0; i < config->slots; i++)
        self->children[i].fd = -1;
    unsigned live = 0;
    for (unsigned i = 0; i < config->slots; i++)
        live += s_spawn(self, i) == 0;
    if (live == 0) {
        worker_pool_destroy(&self);
        return NULL;
    }
    return self;
}

void worker_pool_destroy(worker_pool_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    worker_pool_t *self = *self_p;
    for (unsigned i = 0; i < self->config.slots; i++) {
        s_child_t *c = &self->children[i];
        if (c->pid > 0) {
            kill(c->pid, SIGKILL);
            while (waitpid(c->pid, NULL, 0) < 0 && errno == EINTR)
                ;
        }
        if (c->fd >= 0)
            close(c->fd);
    }
    for (size_t i = self->head; i < self->count; i++)
        worker_pool_result_clear(&self->results[i]);
    free(self->results);
    free(self->children);
    free(self);
    *self_p = NULL;
}

unsigned worker_pool_slots(const worker_pool_t *self)
{
    return self->config.slots;
}

unsigned worker_pool_idle(const worker_pool_t *self)
{
    unsigned n = 0;
    for (unsigned i = 0; i < self->config.slots; i++)
        n += self->children[i].pid > 0 && !self->children[i].busy;
    return n;
}

unsigned worker_pool_busy(const worker_pool_t *self)
{
    unsigned n = 0;
    for (unsigned i = 0; i < self->config.slots; i++)
        n += self->children[i].busy != 0;
    return n;
}

int worker_pool_start(worker_pool_t *self, const proto_job_t *job)
{
    proto_msg_t msg = {.type = PROTO_JOBS};
    msg.u.jobs.n_jobs = 1;
    msg.u.jobs.jobs = (proto_job_t *)job; /* the encoder only reads it */
    uint32_t timeout_ms = job->timeout_ms ? job->timeout_ms : self->config.default_timeout_ms;
    int64_t start_us = common_clock_us();
    for (int attempt = 0; attempt < 2; attempt++) {
        unsigned i;
        for (i = 0; i < self->config.slots; i++)
            if (self->children[i].pid > 0 && !self->children[i].busy)
                break;
        if (i == self->config.slots)
            return attempt == 0 ? -1 : 0;
        s_child_t *c = &self->children[i];
        if (worker_frame_write(c->fd, &msg) == 0) {
            c->busy = 1;
            c->job_id = job->job_id;
            c->start_us = start_us;
            c->timeout_ms = timeout_ms;
            c->deadline_ms = common_clock_ms() + timeout_ms;
            return 0;
        }
        /* The child died while idle; its end of file is still unread. */
        s_on_death(self, i, NULL);
    }
    s_push_failure(self, job->job_id, start_us, PROTO_STATUS_CRASHED,
                   "could not hand the job to a child process", NULL);
    return 0;
}

size_t worker_pool_pollitems(const worker_pool_t *self, zmq_pollitem_t *items, size_t max)
{
    size_t n = 0;
    for (unsigned i = 0; i < self->config.slots && n < max; i++)
        if (self->children[i].pid > 0) {
            items[n].socket = NULL;
            items[n].fd = self->children[i].fd;
            items[n].events = ZMQ_POLLIN;
            items[n].revents = 0;
            n++;
        }
    return n;
}

void worker_pool_handle(worker_pool_t *self, const zmq_pollitem_t *items, size_t n)
{
    for (size_t k = 0; k < n; k++) {
        if (!(items[k].revents & (ZMQ_POLLIN | ZMQ_POLLERR)))
            continue;
        for (unsigned i = 0; i < self->config.slots; i++)
            if (self->children[i].pid > 0 && self->children[i].fd == items[k].fd) {
                s_on_readable(self, i);
                break;
            }
    }
    int64_t now = common_clock_ms();
    for (unsigned i = 0; i < self->config.slots; i++) {
        s_child_t *c = &self->children[i];
        if (c->pid > 0 && c->busy && now >= c->deadline_ms)
            s_on_overrun(self, i);
    }
    if (self->respawn_at_ms && now >= self->respawn_at_ms) {
        self->respawn_at_ms = 0;
        for (unsigned i = 0; i < self->config.slots; i++)
            if (self->children[i].pid == 0)
                s_spawn(self, i);
    }
}

long worker_pool_timeout_ms(const worker_pool_t *self)
{
    int64_t next = self->respawn_at_ms ? self->respawn_at_ms : INT64_MAX;
    for (unsigned i = 0; i < self->config.slots; i++)
        if (self->children[i].pid > 0 && self->children[i].busy &&
            self->children[i].deadline_ms < next)
            next = self->children[i].deadline_ms;
    if (next == INT64_MAX)
        return -1;
    int64_t left = next - common_clock_ms();
    return left < 0 ? 0 : (long)left;
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

void worker_pool_result_clear(worker_pool_result_t *r)
{
    free(r->outcome.fitness);
    free(r->outcome.error);
    r->outcome.fitness = NULL;
    r->outcome.error = NULL;
    r->outcome.n_fitness = 0;
}

size_t worker_pool_wait(worker_pool_t *self, int timeout_ms)
{
    zmq_pollitem_t items[WORKER_POOL_MAX_SLOTS];
    int64_t until = common_clock_ms() + timeout_ms;
    while (self->count == self->head) {
        int64_t left = until - common_clock_ms();
        if (left < 0)
            break;
        long pt = worker_pool_timeout_ms(self);
        if (pt < 0 || pt > left)
            pt = (long)left;
        size_t n = worker_pool_pollitems(self, items, WORKER_POOL_MAX_SLOTS);
        int rc = zmq_poll(items, (int)n, pt);
        worker_pool_handle(self, items, rc > 0 ? n : 0);
        if (left == 0)
            break;
    }
    return self->count - self->head;
}

void worker_pool_kill_busy(worker_pool_t *self)
{
    for (unsigned i = 0; i < self->config.slots; i++) {
        s_child_t *c = &self->children[i];
        if (c->pid > 0 && c->busy) {
            kill(c->pid, SIGKILL);
            while (waitpid(c->pid, NULL, 0) < 0 && errno == EINTR)
                ;
            close(c->fd);
            c->fd = -1;
            c->pid = 0;
            c->busy = 0;
        }
    }
}
