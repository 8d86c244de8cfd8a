/* loop.c: the worker daemon's reactor and worker_main_run (worker.h).
 *
 * One thread, one zmq_poll over the broker's DEALER socket and the children's
 * sockets. Each turn: read a bounded number of broker messages, collect
 * finished jobs from the pool, hand queued jobs to idle children, then send
 * every outcome finished this turn in one DONE that also grants the credits
 * prefetch wants (credits.c), heartbeat, and re-register if the broker has
 * been silent past the liveness window. Signal handlers only count signals;
 * the loop drains on the first SIGTERM/SIGINT (no new credits, running jobs
 * finish and are reported, queued ones are handed back with BYE) and stops at
 * once on the second, or when the lifeline pipe from its starter closes. Not here: plugin loading (registry.c), children
 * (pool.c), prefetch arithmetic (credits.c), flags (main.c). */
#include <errno.h>
#include <fcntl.h>
#include <sys/stat.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/utsname.h>
#include <time.h>
#include <unistd.h>
#include <zmq.h>

#include "common/alloc.h"
#include "common/clock.h"
#include "common/fdlimit.h"
#include "common/lifeline.h"
#include "common/replace_file.h"
#include "common/log.h"
#include "credits.h"
#include "msg.h"
#include "calibrate.h"
#include "cgroup.h"
#include "handshake.h"
#include "harvest.h"
#include "pool.h"
#include "reaper.h"
#include "registry.h"
#include "secure.h"
#include "worker.h"

#define S_MAX_MESSAGES_PER_TURN 64 /* broker messages read per turn: children are not starved */
#define S_MAX_OUTCOMES_PER_DONE 10000u
#define S_CLOSE_LINGER_MS 2000 /* time the last DONE and BYE get to leave */
/* The same when the lifeline closed. The broker that the same starter runs
 * (the embedded pool) stops on that lifeline too, and when it is gone first
 * ZeroMQ keeps the BYE for a reconnect and closing waited the whole 2 s: one
 * Pool.shutdown() in seven took 2.02 s instead of 17-34 ms. A broker still
 * there takes the BYE at once: linger only holds what cannot be sent. */
#define S_LIFELINE_LINGER_MS 20
#define S_REHELLO_DEBOUNCE_MS 250
#define S_HARVEST_EVERY_MS 1000 /* how often the idle-harvesting rules are checked */

static volatile sig_atomic_t s_stop_signals;

static void s_on_stop_signal(int sig)
{
    (void)sig;
    if (s_stop_signals < 2)
        s_stop_signals++;
}

typedef struct {
    worker_config_t config;
    char name[PROTO_MAX_NAME_BYTES];
    char host[PROTO_MAX_NAME_BYTES];
    char arch[PROTO_MAX_NAME_BYTES];
    worker_registry_t *registry;
    worker_pool_t *pool;
    void *ctx;
    worker_handshake_t handshake; /* refusals by the broker, for our own log */
    void *sock;
    worker_credits_t credits;
    /* Jobs in hand, not started: FIFO [head, count) of jobs we own. */
    proto_job_t *queue;
    size_t head, count, cap;
    /* Finished, not yet sent. */
    worker_pool_result_t *done;
    size_t n_done, cap_done;
    int64_t next_heartbeat_ms; /* 1.5 heartbeats after our last message */
    int64_t last_sent_ms;
    int64_t last_heard_ms;
    int64_t last_hello_ms;
    int draining;
    uint64_t evaluated;
    /* Idle harvesting (harvest.h): paused while a rule says the owner has
     * the machine; job ids to hand back that could not be sent yet. */
    worker_harvest_t harvest;
    int paused;
    int back_due; /* a HAND_BACK must go out, even with no job ids */
    char pause_reason[PROTO_MAX_NAME_BYTES];
    int64_t next_harvest_ms;
    uint64_t *back;
    size_t n_back, cap_back;
    uint64_t handed_back;
    double speed;
    int lifeline_gone; /* stopped because the lifeline closed */
} s_worker_t;

static size_t s_queued(const s_worker_t *self)
{
    return self->count - self->head;
}

static size_t s_held(const s_worker_t *self)
{
    return s_queued(self) + worker_pool_busy(self->pool);
}

static void s_free_job(proto_job_t *j)
{
    free(j->plugin);
    free(j->params);
    free(j->genome);
    memset(j, 0, sizeof *j);
}

static int s_send(s_worker_t *self, const proto_msg_t *msg)
{
    uint8_t *buf = NULL;
    size_t len = 0;
    int rc = proto_msg_encode(msg, &buf, &len);
    if (rc != PROTO_OK) {
        LOG_ERROR("cannot encode %s (error %d); not sent", proto_type_name((int)msg->type), rc);
        return -1;
    }
    rc = zmq_send(self->sock, buf, len, ZMQ_DONTWAIT) < 0 ? -1 : 0;
    if (rc == 0) { /* any message tells the broker we live */
        self->last_sent_ms = common_clock_ms();
        self->next_heartbeat_ms = self->last_sent_ms + self->config.heartbeat_ms * 3 / 2;
    }
    if (rc != 0)
        LOG_DEBUG("%s not sent: %s", proto_type_name((int)msg->type), zmq_strerror(zmq_errno()));
    free(buf);
    return rc;
}

static void s_send_simple(s_worker_t *self, int type)
{
    proto_msg_t msg = {.type = (uint32_t)type};
    s_send(self, &msg);
}

/* Whether the worker asks for and starts jobs. */
static int s_taking(const s_worker_t *self)
{
    return !self->draining && !self->paused;
}

static void s_grant(s_worker_t *self)
{
    if (!s_taking(self))
        return;
    uint32_t want = worker_credits_want(&self->credits, s_held(self));
    if (want == 0)
        return;
    proto_msg_t msg = {.type = PROTO_CREDIT};
    msg.u.credit.credits = want;
    if (s_send(self, &msg) == 0)
        worker_credits_granted(&self->credits, want, common_clock_us());
}

/* HELLO, then credits for all the capacity not currently held. Jobs held from
 * before are still reported; a broker that does not know them ignores them. */
static void s_register(s_worker_t *self)
{
    size_t n = worker_registry_count(self->registry);
    proto_plugin_info_t *infos = common_xcalloc(n ? n : 1, sizeof *infos);
    for (size_t i = 0; i < n; i++) {
        const worker_plugin_t *p = worker_registry_at(self->registry, i);
        /* The encoder only reads these strings. */
        infos[i].name = (char *)p->plugin->name;
        infos[i].version = (char *)p->plugin->version;
        infos[i].objectives = p->plugin->objectives;
        infos[i].flags =
            (p->plugin->flags & FITFARM_PLUGIN_DETERMINISTIC) ? PROTO_PLUGIN_DETERMINISTIC : 0;
        memcpy(infos[i].digest, p->digest, PROTO_DIGEST_BYTES);
        infos[i].n_seed_params = p->n_seed_params;
        infos[i].seed_params = (char **)p->seed_params;
        infos[i].param_defaults = p->param_defaults ? p->param_defaults : (char *)"";
    }
    proto_msg_t msg = {.type = PROTO_HELLO};
    msg.u.hello.name = self->name;
    msg.u.hello.host = self->host;
    msg.u.hello.arch = self->arch;
    msg.u.hello.slots = worker_pool_slots(self->pool);
    msg.u.hello.n_plugins = (uint32_t)n;
    msg.u.hello.plugins = infos;
    msg.u.hello.speed = self->speed;
    s_send(self, &msg);
    free(infos);
    self->last_hello_ms = common_clock_ms();
    worker_credits_reset(&self->credits);
    if (self->paused)
        self->back_due = 1; /* a HAND_BACK tells the new registration why no credits come */
    s_grant(self);
}

static void s_back_push(s_worker_t *self, uint64_t job_id)
{
    if (self->n_back == self->cap_back) {
        self->cap_back = self->cap_back ? self->cap_back * 2 : 64;
        self->back = common_xrealloc(self->back, self->cap_back, sizeof *self->back);
    }
    self->back[self->n_back++] = job_id;
    self->back_due = 1;
}

/* Jobs in hand and not started go back to the broker (sent by s_flush_back). */
static void s_hand_back_queue(s_worker_t *self)
{
    for (size_t i = self->head; i < self->count; i++) {
        s_back_push(self, self->queue[i].job_id);
        s_free_job(&self->queue[i]);
    }
    self->head = self->count = 0;
}

/* Sends the ids to hand back in HAND_BACK messages; on a send failure the
 * rest waits for the next turn (the broker holds those jobs until then). */
static void s_flush_back(s_worker_t *self)
{
    size_t sent = 0;
    while (self->back_due) {
        size_t n = self->n_back - sent;
        if (n > S_MAX_OUTCOMES_PER_DONE)
            n = S_MAX_OUTCOMES_PER_DONE;
        proto_msg_t msg = {.type = PROTO_HAND_BACK};
        msg.u.hand_back.reason = self->pause_reason;
        msg.u.hand_back.draining = (uint8_t)(self->draining != 0);
        msg.u.hand_back.n_jobs = (uint32_t)n;
        msg.u.hand_back.job_ids = self->back + sent;
        if (s_send(self, &msg) != 0)
            break;
        self->handed_back += n;
        sent += n;
        self->back_due = sent < self->n_back;
    }
    if (sent > 0) {
        memmove(self->back, self->back + sent, (self->n_back - sent) * sizeof *self->back);
        self->n_back -= sent;
    }
}

/* The owner has the machine (reason from harvest.h): no more credits, jobs
 * not started go back, and with --on-reclaim requeue so do running ones,
 * their children killed and replaced. */
static void s_pause(s_worker_t *self, const char *reason)
{
    self->paused = 1;
    snprintf(self->pause_reason, sizeof self->pause_reason, "%s", reason);
    size_t queued = s_queued(self);
    s_hand_back_queue(self);
    size_t stopped = 0;
    if (self->config.on_reclaim == WORKER_RECLAIM_REQUEUE) {
        unsigned busy = worker_pool_busy(self->pool);
        uint64_t *ids = common_xcalloc(busy ? busy : 1, sizeof *ids);
        stopped = worker_pool_reclaim(self->pool, ids, busy);
        for (size_t i = 0; i < stopped; i++)
            s_back_push(self, ids[i]);
        free(ids);
    }
    self->back_due = 1;
    worker_credits_reset(&self->credits);
    LOG_INFO("paused: %s; handing %zu queued and %zu stopped jobs back to the broker, %u "
             "running evaluations finish",
             reason, queued, stopped, worker_pool_busy(self->pool));
    s_flush_back(self);
}

static void s_resume(s_worker_t *self)
{
    LOG_INFO("resumed after being paused (%s); asking the broker for jobs again",
             self->pause_reason);
    self->paused = 0;
    self->pause_reason[0] = '\0';
    worker_credits_reset(&self->credits);
    s_grant(self);
}

/* Checks the idle-harvesting rules once a second. */
static void s_harvest(s_worker_t *self)
{
    if (!worker_harvest_enabled(&self->harvest) || self->draining)
        return;
    int64_t now = common_clock_ms();
    if (now < self->next_harvest_ms)
        return;
    self->next_harvest_ms = now + S_HARVEST_EVERY_MS;
    unsigned running = worker_pool_busy(self->pool);
    unsigned slots = worker_pool_slots(self->pool);
    char reason[PROTO_MAX_NAME_BYTES];
    reason[0] = '\0';
    int take = worker_harvest_check(&self->harvest, running < slots ? running : slots,
                                    time(NULL), reason, sizeof reason);
    if (!take && !self->paused)
        s_pause(self, reason);
    else if (!take && strcmp(reason, self->pause_reason) != 0)
        snprintf(self->pause_reason, sizeof self->pause_reason, "%s", reason); /* for HELLO */
    else if (take && self->paused)
        s_resume(self);
}

static void s_on_jobs(s_worker_t *self, proto_msg_t *msg)
{
    proto_jobs_t *jobs = &msg->u.jobs;
    worker_credits_jobs(&self->credits, jobs->n_jobs, common_clock_us());
    if (self->count + jobs->n_jobs > self->cap) {
        /* Compact before growing. */
        if (self->head > 0)
            memmove(self->queue, self->queue + self->head, s_queued(self) * sizeof *self->queue);
        self->count -= self->head;
        self->head = 0;
        if (self->count + jobs->n_jobs > self->cap) {
            self->cap = self->count + jobs->n_jobs + 64;
            self->queue = common_xrealloc(self->queue, self->cap, sizeof *self->queue);
        }
    }
    for (uint32_t i = 0; i < jobs->n_jobs; i++) {
        /* Take the job's strings over; the message then frees NULLs. */
        self->queue[self->count++] = jobs->jobs[i];
        memset(&jobs->jobs[i], 0, sizeof jobs->jobs[i]);
    }
    LOG_DEBUG("%u jobs arrived; %zu queued, %u running", jobs->n_jobs, s_queued(self),
              worker_pool_busy(self->pool));
    if (self->paused || self->draining) /* sent before the broker read our HAND_BACK */
        s_hand_back_queue(self);
}

/* The broker no longer wants these jobs (another copy finished first): the
 * ones not started are dropped, the running ones' children are killed and
 * replaced (pool.h); none is reported, and the credits come back with the
 * next grant because we hold fewer jobs. */
static void s_on_cancel(s_worker_t *self, const proto_cancel_t *cn)
{
    unsigned queued = 0, stopped = 0;
    for (uint32_t i = 0; i < cn->n_jobs; i++) {
        uint64_t id = cn->job_ids[i];
        int found = 0;
        for (size_t k = self->head; k < self->count && !found; k++) {
            if (self->queue[k].job_id != id)
                continue;
            s_free_job(&self->queue[k]);
            memmove(&self->queue[k], &self->queue[k + 1],
                    (self->count - k - 1) * sizeof *self->queue);
            self->count--;
            found = 1;
            queued++;
        }
        if (!found && worker_pool_cancel(self->pool, id) == 0)
            stopped++;
    }
    LOG_INFO("the broker cancelled %u jobs (another copy finished first): %u not started, %u "
             "stopped, %u already done",
             cn->n_jobs, queued, stopped, cn->n_jobs - queued - stopped);
    s_grant(self);
}

static void s_on_message(s_worker_t *self, const uint8_t *buf, size_t len)
{
    proto_msg_t *msg = NULL;
    proto_err_t err = {0};
    if (proto_msg_decode(buf, len, NULL, &msg, &err) != PROTO_OK) {
        LOG_WARN("dropped an undecodable message from the broker: %s", err.text);
        return;
    }
    self->last_heard_ms = common_clock_ms();
    switch (msg->type) {
    case PROTO_JOBS:
        s_on_jobs(self, msg);
        break;
    case PROTO_REHELLO:
        /* Every message we sent before our HELLO reached a restarted broker
         * earns one REHELLO; answering each would register many times. If
         * the broker really forgot us since, our next heartbeat earns another. */
        if (self->last_heard_ms - self->last_hello_ms < S_REHELLO_DEBOUNCE_MS)
            break;
        LOG_INFO("broker does not know this worker; registering again");
        s_register(self);
        break;
    case PROTO_CANCEL:
        s_on_cancel(self, &msg->u.cancel);
        break;
    case PROTO_HEARTBEAT:
        /* Answered at once, unless we spoke within half an interval: the
         * broker sends every worker its heartbeat in one burst, so the
         * answers reach it together and one wake of its loop reads many,
         * where beats on each worker's own clock would wake it once per
         * worker (README, "Performance"). Our own beat waits 1.5 intervals
         * after our last message, so with a live broker the answer comes
         * first; it still beats when the broker is silent. */
        if (common_clock_ms() - self->last_sent_ms >= self->config.heartbeat_ms / 2)
            s_send_simple(self, PROTO_HEARTBEAT);
        break;
    default:
        LOG_WARN("dropped an unexpected %s from the broker", proto_type_name((int)msg->type));
        break;
    }
    proto_msg_destroy(&msg);
}

static void s_read_broker(s_worker_t *self)
{
    for (int i = 0; i < S_MAX_MESSAGES_PER_TURN; i++) {
        zmq_msg_t part;
        zmq_msg_init(&part);
        if (zmq_msg_recv(&part, self->sock, ZMQ_DONTWAIT) < 0) {
            zmq_msg_close(&part);
            return;
        }
        int more = zmq_msg_more(&part);
        if (!more)
            s_on_message(self, zmq_msg_data(&part), zmq_msg_size(&part));
        zmq_msg_close(&part);
        if (more) {
            /* Bodies are one frame; skip the rest of this message. */
            LOG_WARN("dropped a multi-frame message from the broker");
            do {
                zmq_msg_init(&part);
                if (zmq_msg_recv(&part, self->sock, ZMQ_DONTWAIT) < 0) {
                    zmq_msg_close(&part);
                    return;
                }
                more = zmq_msg_more(&part);
                zmq_msg_close(&part);
            } while (more);
        }
    }
}

static void s_collect(s_worker_t *self)
{
    worker_pool_result_t r;
    while (worker_pool_take(self->pool, &r)) {
        worker_credits_eval(&self->credits, r.wall_us);
        r.outcome.wall_seconds = (double)r.wall_us / 1e6;
        if (self->n_done == self->cap_done) {
            self->cap_done = self->cap_done ? self->cap_done * 2 : 64;
            self->done = common_xrealloc(self->done, self->cap_done, sizeof *self->done);
        }
        self->done[self->n_done++] = r;
        self->evaluated++;
        LOG_DEBUG("job %llu: %s in %lld us%s%s", (unsigned long long)r.outcome.job_id,
                  proto_status_name((int)r.outcome.status), (long long)r.wall_us,
                  r.outcome.error[0] ? ": " : "", r.outcome.error);
    }
}

static void s_dispatch(s_worker_t *self)
{
    while (s_taking(self) && s_queued(self) > 0 && worker_pool_idle(self->pool) > 0) {
        proto_job_t *job = &self->queue[self->head];
        if (worker_pool_start(self->pool, job) != 0)
            break;
        s_free_job(job);
        self->head++;
    }
    if (self->head == self->count)
        self->head = self->count = 0;
}

/* Sends the turn's outcomes in DONE messages, the first carrying new credits.
 * On a send failure the outcomes stay for the next turn. */
static void s_flush(s_worker_t *self)
{
    size_t sent = 0;
    while (sent < self->n_done) {
        size_t n = self->n_done - sent;
        if (n > S_MAX_OUTCOMES_PER_DONE)
            n = S_MAX_OUTCOMES_PER_DONE;
        proto_outcome_t *outs = common_xcalloc(n, sizeof *outs);
        for (size_t i = 0; i < n; i++)
            outs[i] = self->done[sent + i].outcome;
        size_t held_after = s_held(self);
        uint32_t want = s_taking(self) ? worker_credits_want(&self->credits, held_after) : 0;
        proto_msg_t msg = {.type = PROTO_DONE};
        msg.u.done.credits = want;
        msg.u.done.n_outcomes = (uint32_t)n;
        msg.u.done.outcomes = outs;
        int rc = s_send(self, &msg);
        free(outs);
        if (rc != 0)
            break;
        worker_credits_granted(&self->credits, want, common_clock_us());
        for (size_t i = 0; i < n; i++)
            worker_pool_result_clear(&self->done[sent + i]);
        sent += n;
    }
    if (sent > 0) {
        memmove(self->done, self->done + sent, (self->n_done - sent) * sizeof *self->done);
        self->n_done -= sent;
    }
    if (self->n_done == 0)
        s_grant(self);
}

static long s_min_timeout(long a, long b)
{
    if (a < 0)
        return b;
    if (b < 0)
        return a;
    return a < b ? a : b;
}

static void s_timers(s_worker_t *self)
{
    int64_t now = common_clock_ms();
    if (now >= self->next_heartbeat_ms) {
        s_send_simple(self, PROTO_HEARTBEAT);
        if (self->next_heartbeat_ms <= now) /* it could not be sent: try again later */
            self->next_heartbeat_ms = now + self->config.heartbeat_ms;
    }
    if (now - self->last_heard_ms >= self->config.liveness_ms) {
        LOG_WARN("broker silent for %lld ms; registering again",
                 (long long)(now - self->last_heard_ms));
        self->last_heard_ms = now;
        s_register(self);
    }
}

static int s_open_socket(s_worker_t *self)
{
    self->ctx = zmq_ctx_new();
    if (!self->ctx) {
        LOG_ERROR("cannot create a ZeroMQ context: %s", zmq_strerror(zmq_errno()));
        return -1;
    }
    self->sock = zmq_socket(self->ctx, ZMQ_DEALER);
    if (!self->sock) {
        LOG_ERROR("cannot create a socket: %s", zmq_strerror(zmq_errno()));
        return -1;
    }
    int linger = 0, ivl = 100, ivl_max = 2000;
    /* A broker on this machine (ipc://, the embedded pool) may be a few ms
     * from binding when we start: retry quickly instead of backing off to
     * hundreds of milliseconds, which would be the pool's start time. */
    if (strncmp(self->config.broker_endpoint, "ipc://", 6) == 0)
        ivl = 5, ivl_max = 250;
    int64_t maxmsg = PROTO_MAX_MESSAGE_BYTES;
    zmq_setsockopt(self->sock, ZMQ_LINGER, &linger, sizeof linger);
    zmq_setsockopt(self->sock, ZMQ_RECONNECT_IVL, &ivl, sizeof ivl);
    zmq_setsockopt(self->sock, ZMQ_RECONNECT_IVL_MAX, &ivl_max, sizeof ivl_max);
    zmq_setsockopt(self->sock, ZMQ_MAXMSGSIZE, &maxmsg, sizeof maxmsg);
    if (worker_secure_socket(self->sock, &self->config) != 0)
        return -1;
    if (!self->config.insecure)
        (void)worker_handshake_open(&self->handshake, self->ctx, self->sock,
                                    self->config.broker_endpoint);
    if (zmq_connect(self->sock, self->config.broker_endpoint) != 0) {
        LOG_ERROR("cannot connect to %s: %s", self->config.broker_endpoint,
                  zmq_strerror(zmq_errno()));
        return -1;
    }
    return 0;
}

static int s_load_plugins(s_worker_t *self)
{
    const char *defaults[WORKER_MAX_PLUGIN_DIRS + 1];
    const char *const *dirs = self->config.plugin_dirs;
    size_t n_named = 0;
    while (n_named < WORKER_MAX_PLUGIN_DIRS && dirs[n_named])
        n_named++;
    defaults[0] = NULL;
    if (!n_named || self->config.with_default_plugins)
        worker_default_plugin_dirs(defaults, WORKER_MAX_PLUGIN_DIRS);
    for (size_t i = 0; i < n_named; i++)
        worker_registry_load_dir(self->registry, dirs[i]);
    for (size_t i = 0; i < WORKER_MAX_PLUGIN_DIRS && defaults[i]; i++) {
        /* A default folder that does not exist (say, nothing installed yet)
         * is normal; a folder the user named is worth a warning. */
        struct stat st;
        if (stat(defaults[i], &st) != 0 || !S_ISDIR(st.st_mode)) {
            LOG_DEBUG("no plugin directory %s", defaults[i]);
            continue;
        }
        /* A named folder may be a default one too (or two defaults the same
         * folder): load it once, or its plugins would clash with themselves. */
        int seen = 0;
        for (size_t j = 0; j < n_named + i && !seen; j++) {
            const char *other = j < n_named ? dirs[j] : defaults[j - n_named];
            struct stat ost;
            seen = stat(other, &ost) == 0 && ost.st_dev == st.st_dev && ost.st_ino == st.st_ino;
        }
        if (!seen)
            worker_registry_load_dir(self->registry, defaults[i]);
    }
    if (!dirs[0])
        dirs = defaults;
    for (size_t i = 0; i < WORKER_MAX_EXEC && self->config.exec[i]; i++) {
        char err[512];
        if (worker_registry_add_exec(self->registry, self->config.exec[i], err, sizeof err) !=
            0) {
            LOG_ERROR("cannot use --exec %s: %s", self->config.exec[i], err);
            return -1;
        }
    }
    if (worker_registry_count(self->registry) == 0) {
        LOG_ERROR("no plugins found (looked in %s%s); nothing to evaluate",
                  dirs[0] ? dirs[0] : "no folder", dirs[0] && dirs[1] ? " and more" : "");
        return -1;
    }
    return 0;
}

static void s_identity(s_worker_t *self)
{
    if (gethostname(self->host, sizeof self->host) != 0 || !self->host[0])
        snprintf(self->host, sizeof self->host, "unknown");
    self->host[sizeof self->host - 1] = '\0';
    struct utsname u;
    if (uname(&u) == 0)
        snprintf(self->arch, sizeof self->arch, "%s", u.machine);
    else
        snprintf(self->arch, sizeof self->arch, "unknown");
    if (self->config.name && self->config.name[0])
        snprintf(self->name, sizeof self->name, "%s", self->config.name);
    else
        snprintf(self->name, sizeof self->name, "%.100s-%ld", self->host, (long)getpid());
}

static void s_defaults(worker_config_t *c)
{
    if (!c->slots) {
        long n = sysconf(_SC_NPROCESSORS_ONLN);
        c->slots = n > 0 ? (unsigned)n : 1;
    }
    if (c->slots > WORKER_POOL_MAX_SLOTS)
        c->slots = WORKER_POOL_MAX_SLOTS;
    if (c->heartbeat_ms <= 0)
        c->heartbeat_ms = 1000;
    if (c->liveness_ms <= 0)
        c->liveness_ms = 5000;
    if (!c->default_timeout_s)
        c->default_timeout_s = 3600;
    if (c->nice < 0)
        c->nice = WORKER_DEFAULT_NICE;
    if (c->nice > 19)
        c->nice = 19;
}

/* The ready file: "ready PID\n", written to a temporary name and renamed so
 * a reader never sees half of it. */
static int s_write_ready(const char *path)
{
    char text[64];
    int n = snprintf(text, sizeof text, "ready %ld\n", (long)getpid());
    if (common_replace_file(path, text, (size_t)n, 0) != 0) {
        LOG_ERROR("cannot write the ready file %s: %s", path, strerror(errno));
        return -1;
    }
    return 0;
}

/* Runs the reactor until drained or forced. */
static void s_run(s_worker_t *self)
{
    zmq_pollitem_t items[3 + WORKER_POOL_ITEMS];
    int forced = 0;
    int64_t drain_stuck_ms = 0;
    int lifeline = self->config.lifeline_fd;
    if (worker_harvest_enabled(&self->harvest)) {
        /* Decided before HELLO, so a worker started outside its hours never
         * grants a credit it would have to take back. */
        char reason[PROTO_MAX_NAME_BYTES] = "";
        if (!worker_harvest_check(&self->harvest, 0, time(NULL), reason, sizeof reason)) {
            self->paused = 1;
            snprintf(self->pause_reason, sizeof self->pause_reason, "%s", reason);
            LOG_INFO("starting paused: %s", reason);
        }
        self->next_harvest_ms = common_clock_ms() + S_HARVEST_EVERY_MS;
    }
    s_register(self);
    if (self->config.ready_file && s_write_ready(self->config.ready_file) != 0)
        return;
    for (;;) {
        if (s_stop_signals >= 2) {
            LOG_WARN("second stop signal: killing %u running evaluations",
                     worker_pool_busy(self->pool));
            worker_pool_kill_busy(self->pool);
            self->lifeline_gone = 1;
            forced = 1;
            break;
        }
        if (s_stop_signals >= 1 && !self->draining) {
            self->draining = 1;
            LOG_INFO("draining: %u running evaluations finish, %zu queued jobs go back to the "
                     "broker",
                     worker_pool_busy(self->pool), s_queued(self));
            /* At once, not with BYE: other workers can start them now, and
             * the broker shows this one as draining (msg.h HAND_BACK). */
            snprintf(self->pause_reason, sizeof self->pause_reason,
                     "stopping: running evaluations finish");
            s_hand_back_queue(self);
            self->back_due = 1;
            s_flush_back(self);
        }
        if (self->draining && worker_pool_busy(self->pool) == 0) {
            if (self->n_done == 0)
                break;
            /* Outcomes that cannot leave (the broker is gone) must not keep
             * a stopping worker alive forever. */
            if (!drain_stuck_ms)
                drain_stuck_ms = common_clock_ms();
            else if (common_clock_ms() - drain_stuck_ms > self->config.liveness_ms) {
                LOG_WARN("%zu outcomes could not be sent while draining; dropping them",
                         self->n_done);
                break;
            }
        }

        int64_t now = common_clock_ms();
        long timeout = self->next_heartbeat_ms - now;
        timeout = s_min_timeout(timeout, self->last_heard_ms + self->config.liveness_ms - now);
        timeout = s_min_timeout(timeout, worker_pool_timeout_ms(self->pool));
        if (self->n_done > 0 || self->back_due) /* a send failed: retry soon */
            timeout = s_min_timeout(timeout, 10);
        if (worker_harvest_enabled(&self->harvest) && !self->draining)
            timeout = s_min_timeout(timeout, self->next_harvest_ms - now);
        if (timeout < 0)
            timeout = 0;
        items[0].socket = self->sock;
        items[0].fd = 0;
        items[0].events = ZMQ_POLLIN;
        items[0].revents = 0;
        size_t n = worker_pool_pollitems(self->pool, items + 1, WORKER_POOL_ITEMS);
        size_t n_items = 1 + n;
        if (lifeline > 0)
            items[n_items++] = (zmq_pollitem_t){.fd = lifeline, .events = ZMQ_POLLIN};
        size_t monitor_at = n_items;
        if (self->handshake.pair)
            items[n_items++] = (zmq_pollitem_t){.socket = self->handshake.pair,
                                                .events = ZMQ_POLLIN};
        int rc = zmq_poll(items, (int)n_items, timeout);
        if (rc < 0 && zmq_errno() != EINTR) {
            LOG_ERROR("zmq_poll failed: %s; stopping", zmq_strerror(zmq_errno()));
            forced = 1;
            break;
        }
        if (rc > 0 && lifeline > 0 && (items[1 + n].revents & (ZMQ_POLLIN | ZMQ_POLLERR)) &&
            common_lifeline_gone(lifeline)) {
            /* The process that started this pool died: its results have no
             * reader, and a long evaluation must not keep us alive. */
            LOG_INFO("the lifeline closed (the process that started this worker let go or is gone); "
                     "killing %u running evaluations and stopping",
                     worker_pool_busy(self->pool));
            worker_pool_kill_busy(self->pool);
            self->lifeline_gone = 1;
            forced = 1;
            break;
        }
        if (rc > 0 && monitor_at < n_items && (items[monitor_at].revents & ZMQ_POLLIN))
            worker_handshake_handle(&self->handshake);
        if (rc > 0 && (items[0].revents & ZMQ_POLLIN))
            s_read_broker(self);
        worker_pool_handle(self->pool, items + 1, rc > 0 ? n : 0);
        s_collect(self);
        s_dispatch(self);
        s_collect(self);
        s_flush(self);
        s_flush_back(self);
        s_harvest(self);
        s_timers(self);
    }
    if (forced && self->n_done > 0)
        s_flush(self);
    s_send_simple(self, PROTO_BYE);
    LOG_INFO("stopped after %llu evaluations; %llu jobs handed back while paused or draining, "
             "%zu more with the goodbye",
             (unsigned long long)self->evaluated, (unsigned long long)self->handed_back,
             s_queued(self));
}

int worker_main_run(const worker_config_t *config)
{
    s_worker_t self_ = {0}, *self = &self_;
    int rc = 1;
    self->config = *config;
    s_defaults(&self->config);
    if (!self->config.broker_endpoint) {
        LOG_ERROR("no broker endpoint given");
        return 1;
    }
    if (worker_secure_check(&self->config) != 0)
        return 1;
    s_identity(self);
    {
        char herr[256];
        int window[2] = {self->config.hours_start_s, self->config.hours_end_s};
        if (worker_harvest_init(&self->harvest, self->config.max_load,
                                self->config.has_hours ? window : NULL, herr,
                                sizeof herr) != 0) {
            LOG_ERROR("%s; not starting", herr);
            return 1;
        }
    }
    self->speed = worker_calibrate_at_start(self->config.no_calibration);
    worker_credits_init(&self->credits, self->config.slots);
    s_stop_signals = 0;
    (void)common_fdlimit_raise("worker");
    /* A cgroup per slot holds whatever a plugin starts, also past the
     * worker's own death (its keeper, cgroup.h); first, so that the keeper
     * is not a child of the subreaper below. */
    worker_cgroup_t cgroup = {.keeper_fd = -1};
    worker_cgroup_setup(&cgroup, self->config.no_cgroup);
    /* A plugin's process that leaves its group and loses its parent comes
     * to us instead of init, so it cannot outlive the worker (reaper.h). */
    int subreaper = worker_reaper_become() == 0;
    if (!subreaper)
        LOG_WARN("cannot become a child subreaper (%s): a plugin's process that calls setsid() "
                 "and loses its parent may outlive its evaluation",
                 strerror(errno));

    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = s_on_stop_signal;
    sigemptyset(&sa.sa_mask);
    /* No SA_RESTART: zmq_poll must return so the loop sees the flag. */
    sigaction(SIGTERM, &sa, NULL);
    sigaction(SIGINT, &sa, NULL);
    signal(SIGPIPE, SIG_IGN);

    self->registry = worker_registry_new();
    if (s_load_plugins(self) != 0)
        goto cleanup;
    /* The exec plugins' probes ran and stopped: nothing they started stays. */
    if (subreaper && worker_reaper_sweep(NULL, 0, 1000) > 0)
        LOG_WARN("killed processes that exec programs started while introducing themselves");
    worker_pool_config_t pc = {
        .slots = self->config.slots,
        .registry = self->registry,
        .mem_limit_mb = self->config.mem_limit_mb,
        .reap_orphans = subreaper,
        .cgroup = cgroup.enabled ? &cgroup : NULL,
        .nice = self->config.nice,
        .default_timeout_ms = self->config.default_timeout_s > 4000000u
                                  ? 4000000000u
                                  : self->config.default_timeout_s * 1000u,
    };
    /* Fork the children before ZeroMQ starts its threads. */
    self->pool = worker_pool_new(&pc);
    if (!self->pool)
        goto cleanup;
    if (s_open_socket(self) != 0)
        goto cleanup;
    LOG_INFO("worker %s on %s (%s): %u slots at nice +%d, %zu plugins, broker %s", self->name,
             self->host, self->arch, self->config.slots, self->config.nice,
             worker_registry_count(self->registry), self->config.broker_endpoint);
    if (worker_harvest_enabled(&self->harvest)) {
        char rules[96] = "", a[16], b[16];
        if (self->config.max_load > 0)
            snprintf(rules, sizeof rules, "pauses above a load of %g from others",
                     self->config.max_load);
        if (self->config.has_hours) {
            snprintf(a, sizeof a, "%02d:%02d", self->config.hours_start_s / 3600,
                     self->config.hours_start_s / 60 % 60);
            snprintf(b, sizeof b, "%02d:%02d", self->config.hours_end_s / 3600,
                     self->config.hours_end_s / 60 % 60);
            size_t used = strlen(rules);
            snprintf(rules + used, sizeof rules - used, "%stakes jobs from %s to %s local time",
                     used ? " and " : "", a, b);
        }
        LOG_INFO("idle harvesting: %s; when reclaimed, running evaluations %s", rules,
                 self->config.on_reclaim == WORKER_RECLAIM_REQUEUE ? "are stopped and handed back"
                                                                   : "finish");
    }
    self->last_heard_ms = common_clock_ms();
    self->next_heartbeat_ms = self->last_heard_ms + self->config.heartbeat_ms;
    s_run(self);
    rc = 0;
cleanup:
    if (self->sock) {
        /* Give the last DONE and BYE a moment to leave. */
        int linger = self->lifeline_gone ? S_LIFELINE_LINGER_MS : S_CLOSE_LINGER_MS;
        zmq_setsockopt(self->sock, ZMQ_LINGER, &linger, sizeof linger);
        zmq_close(self->sock);
    }
    worker_handshake_close(&self->handshake);
    if (self->ctx)
        zmq_ctx_term(self->ctx);
    worker_pool_destroy(&self->pool);
    worker_cgroup_close(&cgroup); /* after the children: what they left goes too */
    for (size_t i = self->head; i < self->count; i++)
        s_free_job(&self->queue[i]);
    free(self->queue);
    for (size_t i = 0; i < self->n_done; i++)
        worker_pool_result_clear(&self->done[i]);
    free(self->done);
    free(self->back);
    worker_registry_destroy(&self->registry);
    signal(SIGTERM, SIG_DFL);
    signal(SIGINT, SIG_DFL);
    return rc;
}
