/* exec_plugin.c: the exec plugin: an external program as a co-process
 * speaking JSON Lines (protocol in exec_plugin.h).
 *
 * Owns the table of exec descriptors, the probe that reads a program's
 * introduction when the worker starts, and the co-process each worker child
 * starts on its first evaluation: spawning it (no shell, own process group,
 * killed with its parent through PR_SET_PDEATHSIG, no inherited descriptors),
 * timed line I/O with poll(), and killing and reaping it after any protocol
 * violation so the next evaluation starts it afresh. Text encoding and
 * decoding live in exec_protocol.c. Does not own the per-evaluation time-out:
 * the worker kills a child that overruns it, and the co-process dies with it.
 *
 * The plugin ABI's create() receives no descriptor, so each table slot gets
 * its own tiny create trampoline that knows its slot. evaluate() and destroy()
 * find everything through the context. */
#include "exec_plugin.h"

#include <assert.h>
#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <sodium.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/prctl.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/clock.h"
#include "common/fdlimit.h"
#include "common/log.h"
#include "exec_protocol.h"
#include "limits.h"
#include "worker.h"

extern char **environ;

static_assert(WORKER_EXEC_MAX_PLUGINS == WORKER_MAX_EXEC, "one exec slot per --exec entry");
static_assert(PROTO_DIGEST_BYTES == crypto_generichash_BYTES, "the digest is BLAKE2b-256");

#define S_READ_CHUNK 65536u
#define S_BUF_MAX (WORKER_EXEC_MAX_LINE + 1u + S_READ_CHUNK)
#define S_POLITE_STOP_MS 500 /* a probe or destroyed co-process gets this long to exit on EOF */
#define S_EXIT_GRACE_MS 200  /* after EOF, wait this long for the exit status before killing */

/* Results of s_read_line and s_write_all. */
enum { S_IO_OK = 0, S_IO_EOF, S_IO_TIMEOUT, S_IO_LONG, S_IO_ERROR };

/* One running program. Unconsumed output is buf[start, len). */
typedef struct {
    pid_t pid;   /* 0: none runs */
    pid_t owner; /* the process that started it; a forked child must not use it */
    int to_fd;   /* its stdin */
    int from_fd; /* its stdout */
    char *buf;
    size_t start, len, cap;
} s_coproc_t;

typedef struct {
    fitfarm_plugin_t desc; /* first member: a descriptor pointer is a pointer to this */
    unsigned slot;
    char *name;    /* NAME from the spec */
    char *command; /* COMMAND as configured */
    char **argv;   /* COMMAND split into words */
    char *path;    /* argv[0] resolved on PATH */
    worker_exec_intro_t intro;
    uint8_t digest[PROTO_DIGEST_BYTES];
    int answer_timeout_ms; /* 0: no limit of our own */
    s_coproc_t cp;         /* this process's co-process */
    char *request;         /* request line buffer, reused */
    size_t request_cap;
} s_exec_t;

typedef struct {
    s_exec_t *exec;
    char *params_line; /* compact JSON object, one line */
} s_ctx_t;

static s_exec_t *s_table[WORKER_EXEC_MAX_PLUGINS];

static void s_errf(char *err, size_t errlen, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static void s_errf(char *err, size_t errlen, const char *fmt, ...)
{
    if (!err || errlen == 0)
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err, errlen, fmt, ap);
    va_end(ap);
}

static void s_sleep_ms(int ms)
{
    struct timespec ts = {.tv_sec = ms / 1000, .tv_nsec = (long)(ms % 1000) * 1000000L};
    while (nanosleep(&ts, &ts) != 0 && errno == EINTR)
        ;
}

/* ---- descriptors and pipes ------------------------------------------- */

/* pipe2 with both ends at 3 or above, so the child's dup2 onto 0 and 1 can
 * never clobber one of them (a worker may run with stdin closed). */
static int s_pipe(int fds[2])
{
    if (pipe2(fds, O_CLOEXEC) != 0)
        return -1;
    for (int i = 0; i < 2; i++) {
        if (fds[i] < 3) {
            int moved = fcntl(fds[i], F_DUPFD_CLOEXEC, 3);
            if (moved < 0) {
                close(fds[0]);
                close(fds[1]);
                return -1;
            }
            close(fds[i]);
            fds[i] = moved;
        }
    }
    return 0;
}

static void s_close(int *fd)
{
    if (*fd >= 0)
        close(*fd);
    *fd = -1;
}

/* Resolves argv0 like execvp would, but in the parent, so the forked child
 * only calls async-signal-safe functions (the worker has threads). Returns a
 * malloc'd path or NULL with a sentence in err. */
static char *s_resolve(const char *argv0, char *err, size_t errlen)
{
    struct stat st;
    if (strchr(argv0, '/')) {
        if (stat(argv0, &st) != 0 || !S_ISREG(st.st_mode) || access(argv0, X_OK) != 0) {
            s_errf(err, errlen, "'%s' is not an executable file", argv0);
            return NULL;
        }
        return common_xstrdup(argv0);
    }
    const char *path = getenv("PATH");
    if (!path || !*path)
        path = "/usr/local/bin:/usr/bin:/bin";
    size_t alen = strlen(argv0);
    const char *p = path;
    for (;;) {
        const char *colon = strchr(p, ':');
        size_t dlen = colon ? (size_t)(colon - p) : strlen(p);
        char *cand = common_xmalloc(dlen + alen + 3);
        if (dlen == 0)
            snprintf(cand, dlen + alen + 3, "./%s", argv0);
        else
            snprintf(cand, dlen + alen + 3, "%.*s/%s", (int)dlen, p, argv0);
        if (stat(cand, &st) == 0 && S_ISREG(st.st_mode) && access(cand, X_OK) == 0)
            return cand;
        free(cand);
        if (!colon)
            break;
        p = colon + 1;
    }
    s_errf(err, errlen, "'%s' is not found on PATH", argv0);
    return NULL;
}

/* ---- the co-process --------------------------------------------------- */

static void s_coproc_init(s_coproc_t *cp)
{
    memset(cp, 0, sizeof *cp);
    cp->to_fd = -1;
    cp->from_fd = -1;
}

/* Forgets a co-process started by another process (this one is a forked copy):
 * closes our copies of its pipes, never signals it. */
static void s_coproc_adopt(s_coproc_t *cp)
{
    if (cp->pid && cp->owner != getpid()) {
        s_close(&cp->to_fd);
        s_close(&cp->from_fd);
        cp->pid = 0;
        cp->start = cp->len = 0;
    }
}

/* Writes how a reaped child ended into out. */
static void s_describe_status(int status, char *out, size_t outlen)
{
    if (WIFEXITED(status))
        snprintf(out, outlen, "exited with status %d", WEXITSTATUS(status));
    else if (WIFSIGNALED(status))
        snprintf(out, outlen, "was killed by signal %d (%s)", WTERMSIG(status),
                 strsignal(WTERMSIG(status)));
    else
        snprintf(out, outlen, "ended");
}

/* Ends the co-process: waits up to grace_ms for it to exit by itself (its
 * status is then described in how, if not NULL), kills its process group,
 * reaps it and closes the pipes. Leaves cp ready for a new start. */
static void s_coproc_stop(s_coproc_t *cp, int grace_ms, char *how, size_t howlen)
{
    if (how && howlen)
        snprintf(how, howlen, "was killed");
    /* End of input first: a well-behaved program exits on it by itself. */
    s_close(&cp->to_fd);
    if (!cp->pid) {
        s_close(&cp->from_fd);
        return;
    }
    assert(cp->owner == getpid());
    int exited = 0;
    for (int waited = 0;; waited += 5) {
        siginfo_t info;
        memset(&info, 0, sizeof info);
        /* WNOWAIT: keep the zombie, so its process id (and group id) cannot be
         * reused before the kill below. */
        if (waitid(P_PID, (id_t)cp->pid, &info, WEXITED | WNOHANG | WNOWAIT) != 0) {
            exited = -1; /* ECHILD: someone reaped it already (SIGCHLD ignored) */
            break;
        }
        if (info.si_pid == cp->pid) {
            exited = 1;
            break;
        }
        if (waited >= grace_ms)
            break;
        s_sleep_ms(5);
    }
    if (exited >= 0) {
        /* The whole group: helpers the program started die with it. */
        kill(-cp->pid, SIGKILL);
        kill(cp->pid, SIGKILL);
        int status = 0;
        pid_t r;
        while ((r = waitpid(cp->pid, &status, 0)) < 0 && errno == EINTR)
            ;
        if (r == cp->pid && exited == 1 && how)
            s_describe_status(status, how, howlen);
    } else if (how && howlen) {
        snprintf(how, howlen, "ended");
    }
    s_close(&cp->to_fd);
    s_close(&cp->from_fd);
    cp->pid = 0;
    cp->start = cp->len = 0;
}

static void s_coproc_free(s_coproc_t *cp)
{
    s_coproc_adopt(cp);
    s_coproc_stop(cp, S_POLITE_STOP_MS, NULL, 0);
    free(cp->buf);
    cp->buf = NULL;
    cp->cap = 0;
}

/* Starts x's program as cp. Returns 0, or -1 with a sentence in err. */
static int s_coproc_spawn(const s_exec_t *x, s_coproc_t *cp, char *err, size_t errlen)
{
    int rc = -1;
    int to[2] = {-1, -1}, from[2] = {-1, -1}, status[2] = {-1, -1};
    assert(cp->pid == 0);
    if (s_pipe(to) || s_pipe(from) || s_pipe(status)) {
        s_errf(err, errlen, "cannot create pipes: %s", strerror(errno));
        goto cleanup;
    }
    pid_t parent = getpid();
    long max_fd = common_fdlimit_close_max(); /* not async-signal-safe: ask before fork */
    pid_t pid = fork();
    if (pid < 0) {
        s_errf(err, errlen, "cannot fork: %s", strerror(errno));
        goto cleanup;
    }
    if (pid == 0) {
        /* Child: async-signal-safe calls only until execve. */
        setpgid(0, 0);
        prctl(PR_SET_PDEATHSIG, SIGKILL);
        if (getppid() != parent) /* the parent died before prctl took effect */
            _exit(127);
        sigset_t none;
        sigemptyset(&none);
        sigprocmask(SIG_SETMASK, &none, NULL);
        /* Ignored signals survive execve; the program gets the defaults. */
        struct sigaction dfl;
        memset(&dfl, 0, sizeof dfl);
        dfl.sa_handler = SIG_DFL;
        const int sigs[] = {SIGPIPE, SIGINT, SIGTERM, SIGHUP, SIGQUIT, SIGCHLD, SIGUSR1, SIGUSR2};
        for (size_t i = 0; i < sizeof sigs / sizeof sigs[0]; i++)
            sigaction(sigs[i], &dfl, NULL);
        if (dup2(to[0], 0) < 0 || dup2(from[1], 1) < 0) {
            int e = errno;
            ssize_t w = write(status[1], &e, sizeof e);
            (void)w;
            _exit(127);
        }
        /* No inherited descriptors (the worker's broker connection, other
         * co-processes' pipes) except the close-on-exec status pipe. */
        common_fdlimit_close_from(3, status[1], max_fd);
        execve(x->path, x->argv, environ);
        int e = errno;
        ssize_t w = write(status[1], &e, sizeof e);
        (void)w;
        _exit(127);
    }
    s_close(&to[0]);
    s_close(&from[1]);
    s_close(&status[1]);
    /* The status pipe closes on a successful execve, or carries its errno. */
    int child_errno = 0;
    ssize_t n;
    while ((n = read(status[0], &child_errno, sizeof child_errno)) < 0 && errno == EINTR)
        ;
    if (n == (ssize_t)sizeof child_errno) {
        int st;
        while (waitpid(pid, &st, 0) < 0 && errno == EINTR)
            ;
        s_errf(err, errlen, "cannot run '%s': %s", x->path, strerror(child_errno));
        goto cleanup;
    }
    fcntl(to[1], F_SETFL, fcntl(to[1], F_GETFL) | O_NONBLOCK);
    fcntl(from[0], F_SETFL, fcntl(from[0], F_GETFL) | O_NONBLOCK);
    cp->pid = pid;
    cp->owner = parent;
    cp->to_fd = to[1];
    cp->from_fd = from[0];
    to[1] = from[0] = -1;
    cp->start = cp->len = 0;
    rc = 0;
cleanup:
    for (int i = 0; i < 2; i++) {
        s_close(&to[i]);
        s_close(&from[i]);
        s_close(&status[i]);
    }
    return rc;
}

/* Milliseconds left until deadline_ms for poll(); -1 for no deadline. */
static int s_remaining(int64_t deadline_ms)
{
    if (deadline_ms < 0)
        return -1;
    int64_t left = deadline_ms - common_clock_ms();
    if (left <= 0)
        return 0;
    return left > INT32_MAX ? INT32_MAX : (int)left;
}

/* Reads one line (without its newline) from the co-process. *line points into
 * cp->buf, valid until the next read. Returns S_IO_*. */
static int s_read_line(s_coproc_t *cp, int64_t deadline_ms, const char **line, size_t *n)
{
    size_t scanned = cp->start;
    for (;;) {
        char *nl = cp->len > scanned ? memchr(cp->buf + scanned, '\n', cp->len - scanned) : NULL;
        if (nl) {
            *line = cp->buf + cp->start;
            *n = (size_t)(nl - (cp->buf + cp->start));
            cp->start = (size_t)(nl - cp->buf) + 1;
            return *n > WORKER_EXEC_MAX_LINE ? S_IO_LONG : S_IO_OK;
        }
        if (cp->len - cp->start > WORKER_EXEC_MAX_LINE)
            return S_IO_LONG;
        if (cp->start > 0) {
            memmove(cp->buf, cp->buf + cp->start, cp->len - cp->start);
            cp->len -= cp->start;
            cp->start = 0;
        }
        scanned = cp->len;
        if (cp->cap - cp->len < S_READ_CHUNK) {
            size_t grown = cp->cap ? cp->cap * 2 : S_READ_CHUNK * 2;
            if (grown > S_BUF_MAX)
                grown = S_BUF_MAX;
            cp->buf = common_xrealloc(cp->buf, grown, 1);
            cp->cap = grown;
        }
        struct pollfd pfd = {.fd = cp->from_fd, .events = POLLIN};
        int timeout = s_remaining(deadline_ms);
        int pr = poll(&pfd, 1, timeout);
        if (pr < 0 && errno == EINTR)
            continue;
        if (pr < 0)
            return S_IO_ERROR;
        if (pr == 0)
            return S_IO_TIMEOUT;
        ssize_t got = read(cp->from_fd, cp->buf + cp->len, cp->cap - cp->len);
        if (got < 0 && (errno == EINTR || errno == EAGAIN))
            continue;
        if (got < 0)
            return S_IO_ERROR;
        if (got == 0)
            return S_IO_EOF;
        cp->len += (size_t)got;
    }
}

/* Writes n bytes to the co-process's stdin. A co-process that died must not
 * kill us with SIGPIPE: block it for the write and swallow one we caused. */
static int s_write_all(s_coproc_t *cp, const char *data, size_t n, int64_t deadline_ms)
{
    int rc = S_IO_OK;
    sigset_t pipe_set, old_set, pending;
    sigemptyset(&pipe_set);
    sigaddset(&pipe_set, SIGPIPE);
    sigemptyset(&pending);
    sigpending(&pending);
    int was_pending = sigismember(&pending, SIGPIPE);
    pthread_sigmask(SIG_BLOCK, &pipe_set, &old_set);
    int broke = 0;
    size_t off = 0;
    while (off < n) {
        ssize_t w = write(cp->to_fd, data + off, n - off);
        if (w > 0) {
            off += (size_t)w;
            continue;
        }
        if (w < 0 && errno == EINTR)
            continue;
        if (w < 0 && errno == EPIPE) {
            broke = 1;
            rc = S_IO_EOF;
            break;
        }
        if (w < 0 && errno != EAGAIN) {
            rc = S_IO_ERROR;
            break;
        }
        struct pollfd pfd = {.fd = cp->to_fd, .events = POLLOUT};
        int pr = poll(&pfd, 1, s_remaining(deadline_ms));
        if (pr == 0) {
            rc = S_IO_TIMEOUT;
            break;
        }
        if (pr < 0 && errno != EINTR) {
            rc = S_IO_ERROR;
            break;
        }
    }
    if (broke && !was_pending) {
        struct timespec zero = {0, 0};
        while (sigtimedwait(&pipe_set, NULL, &zero) < 0 && errno == EINTR)
            ;
    }
    pthread_sigmask(SIG_SETMASK, &old_set, NULL);
    return rc;
}

/* Starts the program and reads its introduction (raw line copied to
 * intro_line if not NULL, intro_cap bytes). Returns 0, or -1 with a sentence
 * in err and nothing left running. */
static int s_coproc_start(s_exec_t *x, s_coproc_t *cp, worker_exec_intro_t *intro, char *intro_line,
                          size_t intro_cap, size_t *intro_len, char *err, size_t errlen)
{
    char how[128];
    if (s_coproc_spawn(x, cp, err, errlen))
        return -1;
    const char *line;
    size_t n;
    int io = s_read_line(cp, common_clock_ms() + WORKER_EXEC_INTRO_TIMEOUT_MS, &line, &n);
    if (io == S_IO_OK) {
        if (worker_exec_protocol_intro_decode(line, n, intro, err, errlen) == 0) {
            if (intro_line && n < intro_cap) {
                memcpy(intro_line, line, n);
                intro_line[n] = '\0';
                *intro_len = n;
            }
            return 0;
        }
        s_coproc_stop(cp, 0, NULL, 0);
        return -1;
    }
    switch (io) {
    case S_IO_EOF:
        s_coproc_stop(cp, S_EXIT_GRACE_MS, how, sizeof how);
        s_errf(err, errlen, "the program %s before introducing itself", how);
        break;
    case S_IO_TIMEOUT:
        s_coproc_stop(cp, 0, NULL, 0);
        s_errf(err, errlen, "the program wrote no introduction line within %d ms",
               WORKER_EXEC_INTRO_TIMEOUT_MS);
        break;
    case S_IO_LONG:
        s_coproc_stop(cp, 0, NULL, 0);
        s_errf(err, errlen, "the program's introduction line is longer than %u bytes",
               WORKER_EXEC_MAX_LINE);
        break;
    default:
        s_errf(err, errlen, "cannot read the program's introduction: %s", strerror(errno));
        s_coproc_stop(cp, 0, NULL, 0);
        break;
    }
    return -1;
}

/* ---- the plugin functions --------------------------------------------- */

static int s_create(unsigned slot, const char *params_json, void **ctx, fitfarm_plugin_info_t *info,
                    char *err, size_t errlen)
{
    assert(slot < WORKER_EXEC_MAX_PLUGINS && s_table[slot]);
    s_exec_t *x = s_table[slot];
    char why[256];
    char *line = NULL;
    *ctx = NULL;
    if (worker_exec_protocol_params_line(params_json ? params_json : "{}", &line, why,
                                         sizeof why)) {
        s_errf(err, errlen, "exec plugin '%s': %s", x->name, why);
        return FITFARM_PLUGIN_EINVAL;
    }
    s_ctx_t *c = common_xcalloc(1, sizeof *c);
    c->exec = x;
    c->params_line = line;
    info->objectives = x->intro.objectives;
    info->genome_bytes = 0; /* the program judges the genome, answering "invalid" */
    *ctx = c;
    return FITFARM_PLUGIN_OK;
}

#define S_CREATE_FN(i)                                                                             \
    static int s_create_##i(const char *params_json, void **ctx, fitfarm_plugin_info_t *info,      \
                            char *err, size_t errlen)                                              \
    {                                                                                              \
        return s_create(i, params_json, ctx, info, err, errlen);                                   \
    }
S_CREATE_FN(0)
S_CREATE_FN(1)
S_CREATE_FN(2)
S_CREATE_FN(3)
S_CREATE_FN(4)
S_CREATE_FN(5)
S_CREATE_FN(6)
S_CREATE_FN(7)
S_CREATE_FN(8)
S_CREATE_FN(9)
S_CREATE_FN(10)
S_CREATE_FN(11)
S_CREATE_FN(12)
S_CREATE_FN(13)
S_CREATE_FN(14)
S_CREATE_FN(15)

typedef int (*s_create_fn)(const char *, void **, fitfarm_plugin_info_t *, char *, size_t);
static const s_create_fn s_create_fns[] = {
    s_create_0,  s_create_1,  s_create_2,  s_create_3,  s_create_4,  s_create_5,
    s_create_6,  s_create_7,  s_create_8,  s_create_9,  s_create_10, s_create_11,
    s_create_12, s_create_13, s_create_14, s_create_15,
};
static_assert(sizeof s_create_fns / sizeof s_create_fns[0] == WORKER_EXEC_MAX_PLUGINS,
              "one create trampoline per slot");

static void s_ctx_destroy(void *ctxp)
{
    s_ctx_t *c = ctxp;
    if (!c)
        return;
    free(c->params_line);
    free(c);
}

/* Fails the evaluation with "exec plugin 'NAME': <why>" and kills the program
 * so the next evaluation starts it afresh. */
static int s_fail_restart(s_exec_t *x, int grace_ms, char *err, size_t errlen, const char *fmt, ...)
    __attribute__((format(printf, 5, 6)));

static int s_fail_restart(s_exec_t *x, int grace_ms, char *err, size_t errlen, const char *fmt, ...)
{
    char why[PROTO_MAX_ERROR_BYTES];
    char how[128];
    long pid = (long)x->cp.pid;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(why, sizeof why, fmt, ap);
    va_end(ap);
    s_coproc_stop(&x->cp, grace_ms, how, sizeof how);
    /* With a grace period the program may have ended by itself: say how. */
    char msg[sizeof why + 256];
    if (grace_ms > 0)
        snprintf(msg, sizeof msg, "exec plugin '%s': %s (the program, pid %ld, %s)", x->name, why,
                 pid, how);
    else
        snprintf(msg, sizeof msg, "exec plugin '%s': %s (killed the program, pid %ld)", x->name,
                 why, pid);
    s_errf(err, errlen, "%s", msg);
    LOG_WARN("%s; it restarts on the next evaluation", msg);
    return FITFARM_PLUGIN_EFAIL;
}

static int s_evaluate(void *ctxp, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    s_ctx_t *c = ctxp;
    s_exec_t *x = c->exec;
    s_coproc_t *cp = &x->cp;
    char why[PROTO_MAX_ERROR_BYTES];
    size_t reqlen = 0;

    if (worker_exec_protocol_request_encode(genome, genome_len, seed, c->params_line, &x->request,
                                            &x->request_cap, &reqlen, why, sizeof why)) {
        s_errf(err, errlen, "exec plugin '%s': %s", x->name, why);
        return FITFARM_PLUGIN_EINVAL;
    }
    s_coproc_adopt(cp);
    if (cp->pid) {
        /* Between requests the program must be silent: output now is an extra
         * line (the protocol is lost) or an end of output (it exited). */
        struct pollfd pfd = {.fd = cp->from_fd, .events = POLLIN};
        if (cp->len > cp->start || poll(&pfd, 1, 0) != 0) {
            char how[128];
            long pid = (long)cp->pid;
            s_coproc_stop(cp, S_EXIT_GRACE_MS, how, sizeof how);
            LOG_WARN("exec plugin '%s': the program (pid %ld) wrote output between requests or "
                     "ended (%s); starting it afresh",
                     x->name, pid, how);
        }
    }
    if (!cp->pid) {
        worker_exec_intro_t intro;
        if (s_coproc_start(x, cp, &intro, NULL, 0, NULL, why, sizeof why)) {
            s_errf(err, errlen, "exec plugin '%s': cannot start the program: %s", x->name, why);
            return FITFARM_PLUGIN_EFAIL;
        }
        /* The descriptor promised the pool a version and objectives at start;
         * a program replaced since then must not answer under the old name. */
        if (strcmp(intro.version, x->intro.version) != 0 ||
            intro.objectives != x->intro.objectives ||
            intro.deterministic != x->intro.deterministic)
            return s_fail_restart(x, 0, err, errlen,
                                  "the program's introduction changed since the worker started "
                                  "(version '%s', %u objectives, deterministic %d; now '%s', %u, "
                                  "%d): restart the worker",
                                  x->intro.version, x->intro.objectives, x->intro.deterministic,
                                  intro.version, intro.objectives, intro.deterministic);
    }

    int64_t deadline =
        x->answer_timeout_ms > 0 ? common_clock_ms() + x->answer_timeout_ms : (int64_t)-1;
    int io = s_write_all(cp, x->request, reqlen, deadline);
    if (io == S_IO_EOF)
        return s_fail_restart(x, S_EXIT_GRACE_MS, err, errlen,
                              "the program closed its input before reading the request");
    if (io == S_IO_TIMEOUT)
        return s_fail_restart(x, 0, err, errlen,
                              "the program did not read its request within %d ms",
                              x->answer_timeout_ms);
    if (io != S_IO_OK)
        return s_fail_restart(x, 0, err, errlen, "cannot write the request: %s", strerror(errno));

    const char *line;
    size_t n;
    io = s_read_line(cp, deadline, &line, &n);
    switch (io) {
    case S_IO_OK:
        break;
    case S_IO_EOF:
        return s_fail_restart(x, S_EXIT_GRACE_MS, err, errlen,
                              "the program ended its output before answering");
    case S_IO_TIMEOUT:
        return s_fail_restart(x, 0, err, errlen, "the program did not answer within %d ms",
                              x->answer_timeout_ms);
    case S_IO_LONG:
        return s_fail_restart(x, 0, err, errlen,
                              "the program's answer line is longer than the limit of %u bytes",
                              WORKER_EXEC_MAX_LINE);
    default:
        return s_fail_restart(x, 0, err, errlen, "cannot read the answer: %s", strerror(errno));
    }
    int kind =
        worker_exec_protocol_answer_decode(line, n, x->intro.objectives, fitness, why, sizeof why);
    switch (kind) {
    case WORKER_EXEC_ANSWER_FITNESS:
        return FITFARM_PLUGIN_OK;
    case WORKER_EXEC_ANSWER_INVALID:
        s_errf(err, errlen, "%s", why);
        return FITFARM_PLUGIN_EINVAL;
    case WORKER_EXEC_ANSWER_ERROR:
        s_errf(err, errlen, "%s", why);
        return FITFARM_PLUGIN_EFAIL;
    default:
        return s_fail_restart(x, 0, err, errlen, "%s", why);
    }
}

/* ---- the table -------------------------------------------------------- */

static s_exec_t *s_find(const fitfarm_plugin_t *p)
{
    if (!p)
        return NULL;
    for (unsigned i = 0; i < WORKER_EXEC_MAX_PLUGINS; i++)
        if (s_table[i] && &s_table[i]->desc == p)
            return s_table[i];
    return NULL;
}

static void s_exec_free(s_exec_t *x)
{
    if (!x)
        return;
    s_coproc_free(&x->cp);
    worker_exec_protocol_argv_free(x->argv);
    free(x->path);
    free(x->name);
    free(x->command);
    free(x->request);
    free(x);
}

static int s_name_ok(const char *s, size_t n)
{
    if (n == 0 || n >= PROTO_MAX_NAME_BYTES)
        return 0;
    for (size_t i = 0; i < n; i++) {
        char c = s[i];
        if (!((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' || c == '-'))
            return 0;
    }
    return 1;
}

int worker_exec_plugin_new(const char *spec, const fitfarm_plugin_t **out, char *err, size_t errlen)
{
    int rc = -1;
    s_exec_t *x = NULL;
    s_coproc_t probe;
    char why[PROTO_MAX_ERROR_BYTES];
    char *intro_line = NULL;
    size_t intro_len = 0;
    s_coproc_init(&probe);
    *out = NULL;

    const char *eq = spec ? strchr(spec, '=') : NULL;
    if (!eq) {
        s_errf(err, errlen, "the exec plugin entry '%s' is not NAME=COMMAND",
               spec ? spec : "(null)");
        goto cleanup;
    }
    size_t name_len = (size_t)(eq - spec);
    if (!s_name_ok(spec, name_len)) {
        s_errf(err, errlen,
               "the exec plugin name '%.*s' must be 1 to %u characters of a-z, 0-9, _ and -",
               (int)(name_len < 200 ? name_len : 200), spec, PROTO_MAX_NAME_BYTES - 1);
        goto cleanup;
    }
    unsigned slot = WORKER_EXEC_MAX_PLUGINS;
    for (unsigned i = 0; i < WORKER_EXEC_MAX_PLUGINS; i++) {
        if (!s_table[i]) {
            if (slot == WORKER_EXEC_MAX_PLUGINS)
                slot = i;
        } else if (strlen(s_table[i]->name) == name_len &&
                   memcmp(s_table[i]->name, spec, name_len) == 0) {
            s_errf(err, errlen, "exec plugin '%.*s' is configured twice", (int)name_len, spec);
            goto cleanup;
        }
    }
    if (slot == WORKER_EXEC_MAX_PLUGINS) {
        s_errf(err, errlen, "more than %u exec plugins are configured", WORKER_EXEC_MAX_PLUGINS);
        goto cleanup;
    }

    x = common_xcalloc(1, sizeof *x);
    s_coproc_init(&x->cp);
    x->slot = slot;
    x->name = common_xmalloc(name_len + 1);
    memcpy(x->name, spec, name_len);
    x->name[name_len] = '\0';
    x->command = common_xstrdup(eq + 1);
    if (worker_exec_protocol_split_command(x->command, &x->argv, why, sizeof why)) {
        s_errf(err, errlen, "exec plugin '%s': %s", x->name, why);
        goto cleanup;
    }
    x->path = s_resolve(x->argv[0], why, sizeof why);
    if (!x->path) {
        s_errf(err, errlen, "exec plugin '%s': %s", x->name, why);
        goto cleanup;
    }

    intro_line = common_xmalloc(WORKER_EXEC_MAX_LINE + 1);
    if (s_coproc_start(x, &probe, &x->intro, intro_line, WORKER_EXEC_MAX_LINE + 1, &intro_len, why,
                       sizeof why)) {
        s_errf(err, errlen, "exec plugin '%s' (%s): %s", x->name, x->command, why);
        goto cleanup;
    }
    /* The probe has done its job; an evaluating child starts its own. */
    s_coproc_stop(&probe, S_POLITE_STOP_MS, NULL, 0);

    /* Build digest: length-prefixed command line and introduction line, so a
     * changed command or a changed program is a different build. */
    crypto_generichash_state st;
    uint8_t le[8];
    crypto_generichash_init(&st, NULL, 0, sizeof x->digest);
    size_t parts_len[2] = {strlen(x->command), intro_len};
    const char *parts[2] = {x->command, intro_line};
    for (int i = 0; i < 2; i++) {
        for (int b = 0; b < 8; b++)
            le[b] = (uint8_t)((uint64_t)parts_len[i] >> (8 * b));
        crypto_generichash_update(&st, le, sizeof le);
        crypto_generichash_update(&st, (const unsigned char *)parts[i], parts_len[i]);
    }
    crypto_generichash_final(&st, x->digest, sizeof x->digest);

    x->desc.abi_version = FITFARM_PLUGIN_ABI;
    x->desc.name = x->name;
    x->desc.version = x->intro.version;
    x->desc.objectives = x->intro.objectives;
    x->desc.flags = x->intro.deterministic ? FITFARM_PLUGIN_DETERMINISTIC : 0u;
    x->desc.create = s_create_fns[slot];
    x->desc.evaluate = s_evaluate;
    x->desc.destroy = s_ctx_destroy;
    s_table[slot] = x;
    *out = &x->desc;
    x = NULL;
    rc = 0;
cleanup:
    s_coproc_free(&probe);
    free(intro_line);
    s_exec_free(x);
    return rc;
}

void worker_exec_plugin_destroy(const fitfarm_plugin_t **p)
{
    if (!p || !*p)
        return;
    s_exec_t *x = s_find(*p);
    assert(x && "worker_exec_plugin_destroy of a descriptor it did not make");
    if (x) {
        s_table[x->slot] = NULL;
        s_exec_free(x);
    }
    *p = NULL;
}

const uint8_t *worker_exec_plugin_digest(const fitfarm_plugin_t *p)
{
    s_exec_t *x = s_find(p);
    return x ? x->digest : NULL;
}

int worker_exec_plugin_is_exec(const fitfarm_plugin_t *p)
{
    return s_find(p) != NULL;
}

void worker_exec_plugin_set_answer_timeout(const fitfarm_plugin_t *p, int timeout_ms)
{
    s_exec_t *x = s_find(p);
    if (x)
        x->answer_timeout_ms = timeout_ms > 0 ? timeout_ms : 0;
}

long worker_exec_plugin_coprocess_pid(const fitfarm_plugin_t *p)
{
    s_exec_t *x = s_find(p);
    if (!x || !x->cp.pid || x->cp.owner != getpid())
        return 0;
    return (long)x->cp.pid;
}

int worker_exec_open(const char *spec, const struct fitfarm_plugin **out, char *err,
                     size_t errlen)
{
    return worker_exec_plugin_new(spec, out, err, errlen);
}

void worker_exec_close(const struct fitfarm_plugin **p)
{
    worker_exec_plugin_destroy(p);
}

size_t worker_exec_plugin_coprocesses(pid_t *out, size_t max)
{
    size_t n = 0;
    for (unsigned i = 0; i < WORKER_EXEC_MAX_PLUGINS && n < max; i++) {
        const s_exec_t *x = s_table[i];
        if (x && x->cp.pid && x->cp.owner == getpid())
            out[n++] = x->cp.pid;
    }
    return n;
}
