/* child.c: one child process of the pool (child.h). Owns the context cache,
 * the evaluation call, status mapping, per-evaluation measurements, the
 * running-job status block and the batching of answers. */
#include "child.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <signal.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/prctl.h>
#include <sys/resource.h>
#include <sys/socket.h>
#include <time.h>
#include <unistd.h>

#include "common/clock.h"
#include "common/log.h"
#include "frame.h"
#include "reaper.h"
#ifdef FITFARM_HAVE_EXEC
#include "exec_plugin.h"
#define S_KEEP WORKER_EXEC_MAX_PLUGINS /* co-processes one child can run */
#else
#define S_KEEP 1
#endif

typedef struct {
    const worker_plugin_t *plugin; /* NULL: free slot */
    char *params;
    void *ctx;
    fitfarm_plugin_info_t info;
    uint64_t used; /* LRU stamp */
} s_context_t;

static s_context_t s_contexts[WORKER_CHILD_CONTEXTS];
static uint64_t s_clock;

static double s_cpu_seconds(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static void s_context_drop(s_context_t *c)
{
    if (!c->plugin)
        return;
    c->plugin->plugin->destroy(c->ctx);
    free(c->params);
    memset(c, 0, sizeof *c);
}

/* Finds or creates the context for (plugin, params). Returns it, or NULL with
 * a sentence in err when create() refuses (not cached: the next job with
 * other params may be fine, and the same bad params fail fast anyway). */
static s_context_t *s_context_get(const worker_plugin_t *plugin, const char *params, char *err,
                                  size_t errlen, int *status)
{
    s_context_t *victim = &s_contexts[0];
    for (size_t i = 0; i < WORKER_CHILD_CONTEXTS; i++) {
        s_context_t *c = &s_contexts[i];
        if (c->plugin == plugin && strcmp(c->params, params) == 0) {
            c->used = ++s_clock;
            return c;
        }
        if (!c->plugin || (victim->plugin && c->used < victim->used))
            victim = c;
    }
    s_context_drop(victim);
    void *ctx = NULL;
    fitfarm_plugin_info_t info = {.objectives = plugin->plugin->objectives};
    err[0] = '\0';
    int prc = plugin->plugin->create(params, &ctx, &info, err, errlen);
    err[errlen - 1] = '\0';
    if (prc != FITFARM_PLUGIN_OK) {
        if (!err[0])
            snprintf(err, errlen, "%s: create failed (code %d) without a message",
                     plugin->plugin->name, prc);
        /* EFAIL from create is the plugin's trouble, not the request's. */
        *status = prc == FITFARM_PLUGIN_EFAIL ? PROTO_STATUS_FAILED : PROTO_STATUS_INVALID;
        plugin->plugin->destroy(ctx);
        return NULL;
    }
    if (info.objectives < 1 || info.objectives > PROTO_MAX_OBJECTIVES) {
        snprintf(err, errlen, "%s: these params give %u objectives, the limit is %u",
                 plugin->plugin->name, info.objectives, PROTO_MAX_OBJECTIVES);
        *status = PROTO_STATUS_INVALID;
        plugin->plugin->destroy(ctx);
        return NULL;
    }
    victim->plugin = plugin;
    victim->params = strdup(params);
    if (!victim->params) {
        plugin->plugin->destroy(ctx);
        memset(victim, 0, sizeof *victim);
        snprintf(err, errlen, "child out of memory");
        *status = PROTO_STATUS_FAILED;
        return NULL;
    }
    victim->ctx = ctx;
    victim->info = info;
    victim->used = ++s_clock;
    return victim;
}

/* Evaluates job into out; out->fitness and out->error point into the
 * caller's buffers (no allocation per job). */
static void s_evaluate(const worker_registry_t *registry, const proto_job_t *job,
                       proto_outcome_t *out, double fitness[PROTO_MAX_OBJECTIVES],
                       char err[PROTO_MAX_ERROR_BYTES])
{
    const size_t errsz = PROTO_MAX_ERROR_BYTES;
    uint32_t n_fitness = 0;
    int status = PROTO_STATUS_OK;
    err[0] = '\0';
    double cpu0 = s_cpu_seconds();

    const worker_plugin_t *plugin = worker_registry_find(registry, job->plugin);
    if (!plugin) {
        char names[512];
        worker_registry_names(registry, names, sizeof names);
        snprintf(err, errsz, "unknown plugin \"%.128s\" (this worker carries: %s)",
                 job->plugin, names);
        status = PROTO_STATUS_INVALID;
        goto done;
    }
    s_context_t *c = s_context_get(plugin, job->params, err, errsz, &status);
    if (!c)
        goto done;
    if (c->info.genome_bytes && job->genome_len != c->info.genome_bytes) {
        /* Say it in doubles when it fits: that is how users submit genomes. */
        if (job->genome_len % 8 == 0 && c->info.genome_bytes % 8 == 0)
            snprintf(err, errsz,
                     "%s: genome has %u doubles (%u bytes), these params expect %u (%u bytes)",
                     plugin->plugin->name, job->genome_len / 8, job->genome_len,
                     c->info.genome_bytes / 8, c->info.genome_bytes);
        else
            snprintf(err, errsz, "%s: genome is %u bytes, these params expect %u",
                     plugin->plugin->name, job->genome_len, c->info.genome_bytes);
        status = PROTO_STATUS_INVALID;
        goto done;
    }
    for (uint32_t i = 0; i < c->info.objectives; i++)
        fitness[i] = NAN;
    /* A zero-length genome has no bytes to point at; give the plugin a valid pointer. */
    static const uint8_t empty[8];
    const uint8_t *genome = job->genome_len ? job->genome : empty;
    int prc = plugin->plugin->evaluate(c->ctx, genome, job->genome_len, job->seed, fitness, err,
                                       errsz);
    err[errsz - 1] = '\0';
    if (prc == FITFARM_PLUGIN_EINVAL) {
        status = PROTO_STATUS_INVALID;
    } else if (prc != FITFARM_PLUGIN_OK) {
        status = PROTO_STATUS_FAILED;
        if (prc != FITFARM_PLUGIN_EFAIL && !err[0])
            snprintf(err, errsz, "%s: evaluate returned unknown code %d",
                     plugin->plugin->name, prc);
    } else {
        n_fitness = c->info.objectives;
        err[0] = '\0';
        for (uint32_t i = 0; i < n_fitness; i++)
            if (!isfinite(fitness[i])) {
                snprintf(err, errsz, "objective %u is %s", i,
                         isnan(fitness[i]) ? "NaN" : "infinite");
                status = PROTO_STATUS_FAILED;
                n_fitness = 0;
                break;
            }
    }
    if (status != PROTO_STATUS_OK && !err[0])
        snprintf(err, errsz, "%s: evaluation %s without a message", plugin->plugin->name,
                 status == PROTO_STATUS_INVALID ? "refused the request" : "failed");
done:
    out->job_id = job->job_id;
    out->status = (uint32_t)status;
    out->cpu_seconds = s_cpu_seconds() - cpu0;
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    out->peak_rss_kb = ru.ru_maxrss > 0 ? (uint64_t)ru.ru_maxrss : 0;
    out->n_fitness = n_fitness;
    out->fitness = n_fitness ? fitness : NULL;
    out->error = err;
}

/* The plugin, and whatever it starts, begins with every signal at its
 * default action and none blocked: an ignored SIGTERM or a blocked SIGCHLD
 * inherited from the worker would survive its fork and execve. (Writes to a
 * dead exec co-process need no ignored SIGPIPE: exec_plugin.c blocks it
 * around them.) */
static void s_default_signals(void)
{
    struct sigaction dfl;
    memset(&dfl, 0, sizeof dfl);
    dfl.sa_handler = SIG_DFL;
    sigemptyset(&dfl.sa_mask);
    for (int sig = 1; sig < NSIG; sig++)
        if (sig != SIGKILL && sig != SIGSTOP)
            (void)sigaction(sig, &dfl, NULL); /* fails only for numbers that are no signal */
    sigset_t none;
    sigemptyset(&none);
    sigprocmask(SIG_SETMASK, &none, NULL);
}

static void s_on_group_term(int sig)
{
    (void)sig; /* the worker decides: it drains, and stops us with SIGKILL */
}

/* A batch system stopping a job (Slurm's scancel, a preemption) sends
 * SIGTERM to every process of the job, not only to the worker: with the
 * default action a running evaluation died ("killed by signal 15") and was
 * counted as a crashed attempt, although the worker was draining and meant
 * to let it finish. A handler that does nothing keeps the evaluation
 * running; unlike SIG_IGN it is reset by execve, so programs a plugin
 * starts still get the default action. The worker itself stops children
 * only with SIGKILL. */
static void s_survive_group_term(void)
{
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = s_on_group_term;
    sa.sa_flags = SA_RESTART; /* the plugin's system calls go on */
    sigemptyset(&sa.sa_mask);
    (void)sigaction(SIGTERM, &sa, NULL);
}

/* Kills what the evaluation left running: every child of ours except the
 * exec co-processes (they live across evaluations; their own helpers die
 * with them), and, through the subreaper, whatever those children had
 * started. Cheap when there is nothing: one waitid() for a plugin that
 * forked nothing; a listing of our children (/proc) for an exec plugin. */
static void s_sweep(uint64_t job_id)
{
    if (!worker_reaper_any())
        return; /* the common case, in one system call */
    pid_t keep[S_KEEP];
    size_t n_keep = 0;
#ifdef FITFARM_HAVE_EXEC
    n_keep = worker_exec_plugin_coprocesses(keep, S_KEEP);
#endif
    pid_t kids[S_KEEP + 1];
    size_t n = worker_reaper_children(getpid(), kids, S_KEEP + 1);
    if (n <= n_keep)
        return; /* only co-processes (each of them is a child of ours) */
    unsigned killed = worker_reaper_sweep(keep, n_keep, 1000);
    if (killed)
        LOG_WARN("job %llu: the plugin left %u processes running after the evaluation; "
                 "killed them",
                 (unsigned long long)job_id, killed);
}

void worker_child_run(int fd, const worker_registry_t *registry, size_t mem_limit_mb,
                      pid_t parent, worker_child_status_t *status)
{
    /* Own process group: a Ctrl-C at the worker's terminal reaches the
     * foreground group only, so it cannot kill a running evaluation during a
     * drain; and the worker can kill all this child's helpers at once. The
     * parent makes the same call, whichever runs first. */
    setpgid(0, 0);
    prctl(PR_SET_PDEATHSIG, SIGKILL);
    if (getppid() != parent) /* the parent died before prctl took effect */
        _exit(0);
    s_default_signals();
    s_survive_group_term();
    /* Orphans of the plugin's processes come to us, not to init: the sweep
     * after each evaluation finds them (reaper.h). */
    if (worker_reaper_become() != 0)
        LOG_WARN("child %d: cannot become a child subreaper: %s", (int)getpid(),
                 strerror(errno));
    if (mem_limit_mb > 0) {
        struct rlimit rl;
        rl.rlim_cur = rl.rlim_max = (rlim_t)mem_limit_mb * 1024u * 1024u;
        if (setrlimit(RLIMIT_AS, &rl) != 0)
            LOG_WARN("cannot limit the address space to %zu MB", mem_limit_mb);
    }
    worker_frame_buf_t in = {0}, out = {0};
    uint64_t seq = 0;
    unsigned held = 0; /* answers in out, not yet written */
    for (;;) {
        proto_msg_t *msg = NULL;
        uint64_t side = 0;
        char err[PROTO_MAX_ERROR_BYTES];
        int rc = worker_frame_next(&in, &msg, &side, err, sizeof err);
        if (rc == 0) {
            /* No whole job buffered: take what has arrived, else send the
             * held answers before waiting (the parent needs them to hand
             * over more work). */
            ssize_t r = worker_frame_fill(&in, fd, MSG_DONTWAIT);
            if (r < 0 && errno != EAGAIN && errno != EWOULDBLOCK)
                _exit(3);
            if (r > 0)
                continue;
            if (r < 0) {
                if (worker_frame_flush(&out, fd, 1) != 0)
                    _exit(3);
                held = 0;
                r = worker_frame_fill(&in, fd, 0);
                if (r < 0)
                    _exit(3);
            }
            if (r == 0)
                break; /* the parent closed our socket */
            continue;
        }
        if (rc < 0 || msg->type != PROTO_JOBS || msg->u.jobs.n_jobs != 1) {
            LOG_ERROR("child %d: bad frame from the worker: %s", (int)getpid(),
                      rc < 0 ? err : "not one job");
            proto_msg_destroy(&msg);
            _exit(2);
        }
        const proto_job_t *job = &msg->u.jobs.jobs[0];
        int64_t t0 = common_clock_us();
        atomic_store_explicit(&status->start_us, t0, memory_order_relaxed);
        atomic_store_explicit(&status->running, ++seq, memory_order_release);
        double fitness[PROTO_MAX_OBJECTIVES];
        proto_outcome_t outcome = {0};
        s_evaluate(registry, job, &outcome, fitness, err);
        s_sweep(job->job_id);
        int64_t wall = common_clock_us() - t0;
        /* Every field is encoded and checked by the parent's decoder: one
         * left as stack garbage (a NaN here once) made the parent kill this
         * child for a bad answer and run the job again. */
        outcome.wall_seconds = wall < 0 ? 0.0 : (double)wall / 1e6;
        proto_msg_t reply = {.type = PROTO_DONE};
        reply.u.done.n_outcomes = 1;
        reply.u.done.outcomes = &outcome;
        uint8_t *frame = NULL;
        size_t frame_len = 0;
        rc = worker_frame_encode(&reply, (uint64_t)(wall < 0 ? 0 : wall), &frame, &frame_len);
        if (rc == 0)
            rc = worker_frame_buf_append(&out, frame, frame_len);
        free(frame);
        proto_msg_destroy(&msg);
        if (rc != 0) {
            /* Out of memory under the address-space limit: say so rather
             * than die, in a frame that needs no allocation beyond out's. */
            snprintf(err, sizeof err, "child out of memory for the answer");
            outcome.status = PROTO_STATUS_FAILED;
            outcome.n_fitness = 0;
            outcome.fitness = NULL;
            outcome.error = err;
            if (worker_frame_encode(&reply, (uint64_t)wall, &frame, &frame_len) != 0 ||
                worker_frame_buf_append(&out, frame, frame_len) != 0)
                _exit(3); /* still marked running: the parent blames this job */
            free(frame);
        }
        /* The answer is in out: a death from here on is not this job's. */
        atomic_store_explicit(&status->running, 0, memory_order_release);
        held++;
        if (held >= WORKER_CHILD_BATCH || wall >= WORKER_CHILD_BATCH_US) {
            if (worker_frame_flush(&out, fd, 1) != 0)
                _exit(3);
            held = 0;
        }
    }
    worker_frame_buf_free(&in);
    worker_frame_buf_free(&out);
    for (size_t i = 0; i < WORKER_CHILD_CONTEXTS; i++)
        s_context_drop(&s_contexts[i]);
    /* The co-processes are stopped: what they started and left is ours now. */
    (void)worker_reaper_sweep(NULL, 0, 1000);
    _exit(0);
}

void worker_child_enter(int fd, int out_fd, int nice_incr, const worker_registry_t *registry,
                        size_t mem_limit_mb, pid_t parent, worker_child_status_t *status)
{
    if (dup2(out_fd, 1) < 0 || dup2(out_fd, 2) < 0)
        _exit(4);
    if (out_fd > 2)
        close(out_fd);
    else /* dup2 onto itself keeps close-on-exec: an exec program must inherit it */
        (void)fcntl(out_fd, F_SETFD, 0);
    if (nice_incr > 0) {
        errno = 0;
        if (nice(nice_incr) == -1 && errno != 0)
            _exit(5);
    }
    worker_child_run(fd, registry, mem_limit_mb, parent, status);
}
