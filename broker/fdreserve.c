/* fdreserve.c: descriptor reserve, shedding and the rate-limited warning
 * (fdreserve.h). */
#include "fdreserve.h"

#include <arpa/inet.h>
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <netinet/in.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <linux/filter.h>
#include <signal.h>
#include <sys/prctl.h>
#include <sys/un.h>
#include <sys/wait.h>
#include <unistd.h>

#include "common/clock.h"
#include "common/fdlimit.h"
#include "common/log.h"
#include "stats.h"

static const char *const s_role[2] = {"clients", "workers"};

static struct {
    int reserve[BROKER_FDRESERVE_COUNT];
    int n_reserve;
    int listener[2];   /* -1: not found */
    pid_t shedder;     /* the helper that sheds the workers listener; 0: none */
    int shed_fd;       /* write end of its command pipe; -1: none */
    void *monitor[2];  /* PAIRs we own (--insecure) */
    int started;
    uint64_t failed[2], let_in, shed, closed; /* since the last line */
    uint64_t total_failed;
    int pending[2];       /* accepts failed since the last turn */
    int64_t closed_until; /* workers listener filtered until then (monotonic ms); 0: open */
    int closed_ms;        /* the current back-off, doubled while failures recur */
    int64_t last_fail_ms;
    int64_t last_log_ms;
} s;

/* Back-off of the workers listener: from S_CLOSE_MIN_MS, doubling up to
 * S_CLOSE_MAX_MS while accepts keep failing, back to the minimum after
 * S_CLOSE_RESET_MS without a failure. */
#define S_CLOSE_MIN_MS 500
#define S_CLOSE_MAX_MS 8000
#define S_CLOSE_RESET_MS 30000

/* A classic BPF program of one instruction, "return 0": every packet to the
 * socket is dropped, so no new handshake completes on the listener (a
 * connecting worker's SYN goes unanswered and its kernel retries later). */
static int s_filter(int fd, int on)
{
    if (!on)
        return setsockopt(fd, SOL_SOCKET, SO_DETACH_FILTER, NULL, 0);
    struct sock_filter drop = BPF_STMT(BPF_RET | BPF_K, 0);
    struct sock_fprog prog = {.len = 1, .filter = &drop};
    return setsockopt(fd, SOL_SOCKET, SO_ATTACH_FILTER, &prog, sizeof prog);
}

static void s_refill(void)
{
    while (s.n_reserve < BROKER_FDRESERVE_COUNT) {
        int fd = open("/dev/null", O_RDONLY | O_CLOEXEC);
        if (fd < 0)
            return;
        s.reserve[s.n_reserve++] = fd;
    }
}

static void s_shedder_start(int lfd);

static int s_release_one(void)
{
    if (s.n_reserve == 0)
        return -1;
    close(s.reserve[--s.n_reserve]);
    return 0;
}

void broker_fdreserve_start(void)
{
    memset(&s, 0, sizeof s);
    s.listener[0] = s.listener[1] = -1;
    s.shed_fd = -1;
    s.started = 1;
    s_refill();
}

/* Parses "tcp://A.B.C.D:PORT" / "tcp://[v6]:PORT" / "ipc://PATH" into a
 * socket address to compare with getsockname. Returns its length or 0. */
static socklen_t s_parse(const char *bound, struct sockaddr_storage *ss)
{
    memset(ss, 0, sizeof *ss);
    if (strncmp(bound, "ipc://", 6) == 0) {
        struct sockaddr_un *un = (struct sockaddr_un *)ss;
        un->sun_family = AF_UNIX;
        if (strlen(bound + 6) >= sizeof un->sun_path)
            return 0;
        strcpy(un->sun_path, bound + 6);
        return (socklen_t)sizeof *un;
    }
    if (strncmp(bound, "tcp://", 6) != 0)
        return 0;
    const char *host = bound + 6;
    const char *colon = strrchr(host, ':');
    if (!colon)
        return 0;
    long port = strtol(colon + 1, NULL, 10);
    char addr[64];
    size_t hl = (size_t)(colon - host);
    if (hl >= sizeof addr)
        return 0;
    memcpy(addr, host, hl);
    addr[hl] = '\0';
    if (addr[0] == '[') {
        struct sockaddr_in6 *in6 = (struct sockaddr_in6 *)ss;
        addr[hl - 1] = '\0';
        in6->sin6_family = AF_INET6;
        in6->sin6_port = htons((uint16_t)port);
        return inet_pton(AF_INET6, addr + 1, &in6->sin6_addr) == 1 ? (socklen_t)sizeof *in6 : 0;
    }
    struct sockaddr_in *in = (struct sockaddr_in *)ss;
    in->sin_family = AF_INET;
    in->sin_port = htons((uint16_t)port);
    return inet_pton(AF_INET, addr, &in->sin_addr) == 1 ? (socklen_t)sizeof *in : 0;
}

static int s_same(const struct sockaddr_storage *a, const struct sockaddr_storage *b)
{
    if (a->ss_family != b->ss_family)
        return 0;
    if (a->ss_family == AF_INET) {
        const struct sockaddr_in *x = (const void *)a, *y = (const void *)b;
        return x->sin_port == y->sin_port && x->sin_addr.s_addr == y->sin_addr.s_addr;
    }
    if (a->ss_family == AF_INET6) {
        const struct sockaddr_in6 *x = (const void *)a, *y = (const void *)b;
        return x->sin6_port == y->sin6_port &&
               memcmp(&x->sin6_addr, &y->sin6_addr, sizeof x->sin6_addr) == 0;
    }
    if (a->ss_family == AF_UNIX) {
        const struct sockaddr_un *x = (const void *)a, *y = (const void *)b;
        return strcmp(x->sun_path, y->sun_path) == 0;
    }
    return 0;
}

/* The descriptor listening on bound, or -1. Looks at the lowest descriptors
 * only: the broker binds right after it starts. */
static int s_find_listener(const char *bound)
{
    struct sockaddr_storage want;
    if (!s_parse(bound, &want))
        return -1;
    for (int fd = 0; fd < 4096; fd++) {
        int on = 0;
        socklen_t len = sizeof on;
        if (getsockopt(fd, SOL_SOCKET, SO_ACCEPTCONN, &on, &len) != 0 || !on)
            continue;
        struct sockaddr_storage got;
        socklen_t glen = sizeof got;
        memset(&got, 0, sizeof got);
        if (getsockname(fd, (struct sockaddr *)&got, &glen) == 0 && s_same(&want, &got))
            return fd;
    }
    return -1;
}

void broker_fdreserve_watch(void *ctx, void *router, int role, const char *bound,
                            int own_monitor)
{
    if (!s.started || role < 0 || role > 1)
        return;
    s.listener[role] = s_find_listener(bound);
    /* TCP only: an ipc:// endpoint is the embedded local pool's, a handful of
     * processes that cannot exhaust descriptors, and a second holder of its
     * socket would make its folder look in use after the broker ended. */
    if (s.listener[role] >= 0 && role == BROKER_FDRESERVE_WORKERS && !s.shedder &&
        strncmp(bound, "tcp://", 6) == 0)
        s_shedder_start(s.listener[role]);
    if (s.listener[role] < 0)
        LOG_DEBUG("no listening descriptor found for %s (%s): refused worker connections "
                  "there cannot be shed", s_role[role], bound);
    if (!own_monitor)
        return;
    char ep[64];
    snprintf(ep, sizeof ep, "inproc://fitfarm-broker-accept-%s", s_role[role]);
    int zero = 0;
    /* Connections opened and closed too, for the metrics page (stats.h). */
    if (zmq_socket_monitor(router, ep,
                           ZMQ_EVENT_ACCEPT_FAILED | ZMQ_EVENT_ACCEPTED |
                               ZMQ_EVENT_DISCONNECTED) != 0 ||
        !(s.monitor[role] = zmq_socket(ctx, ZMQ_PAIR)) ||
        zmq_setsockopt(s.monitor[role], ZMQ_LINGER, &zero, sizeof zero) != 0 ||
        zmq_connect(s.monitor[role], ep) != 0) {
        LOG_WARN("cannot watch accept failures on the %s endpoint: %s", s_role[role],
                 zmq_strerror(errno));
        if (s.monitor[role])
            zmq_close(s.monitor[role]);
        s.monitor[role] = NULL;
    }
}

int broker_fdreserve_pollitems(zmq_pollitem_t *items, int max)
{
    int n = 0;
    for (int r = 0; r < 2 && n < max; r++) {
        if (!s.monitor[r])
            continue;
        memset(&items[n], 0, sizeof items[n]);
        items[n].socket = s.monitor[r];
        items[n].events = ZMQ_POLLIN;
        n++;
    }
    return n;
}

/* The shedder: a process forked once the workers listener exists, holding a
 * copy of that descriptor and nothing else. Woken by a byte on its pipe, it
 * accepts and closes at once whatever waits on the listener. It has
 * descriptors to spare when the broker has none, so shedding never needs one
 * of the broker's (freeing one would race libzmq's I/O thread for it). Only
 * async-signal-safe calls after fork: the broker already runs threads. */
static void s_shedder_run(int lfd, int cmd)
{
    char buf[64];
    for (;;) {
        ssize_t n = read(cmd, buf, sizeof buf);
        if (n == 0 || (n < 0 && errno != EINTR))
            _exit(0); /* the broker closed the pipe or is gone */
        for (int i = 0; i < BROKER_FDRESERVE_SHED_MAX; i++) {
            struct pollfd pfd = {.fd = lfd, .events = POLLIN};
            if (poll(&pfd, 1, 0) != 1 || !(pfd.revents & POLLIN))
                break;
            int c = accept4(lfd, NULL, NULL, SOCK_NONBLOCK | SOCK_CLOEXEC);
            if (c < 0)
                break; /* EAGAIN: libzmq took it first */
            close(c);
            /* one byte back per connection shed, for the broker's count */
        }
    }
}

static void s_shedder_start(int lfd)
{
    int p[2];
    if (pipe2(p, O_CLOEXEC) != 0)
        return;
    pid_t parent = getpid();
    pid_t pid = fork();
    if (pid < 0) {
        close(p[0]);
        close(p[1]);
        return;
    }
    if (pid == 0) {
        prctl(PR_SET_PDEATHSIG, SIGKILL);
        if (getppid() != parent)
            _exit(0);
        prctl(PR_SET_NAME, "fitfarm-shed"); /* what ps and top show */
        /* Keep the listener and the pipe's read end, nothing else. */
        for (int fd = 0; fd < 4096; fd++)
            if (fd != lfd && fd != p[0])
                close(fd);
        s_shedder_run(lfd, p[0]);
    }
    close(p[0]);
    int fl = fcntl(p[1], F_GETFL);
    if (fl >= 0)
        (void)fcntl(p[1], F_SETFL, fl | O_NONBLOCK);
    s.shedder = pid;
    s.shed_fd = p[1];
}

/* Wakes the shedder (a full pipe means it has been woken already). */
static void s_shed(int role)
{
    if (role != BROKER_FDRESERVE_WORKERS || s.shed_fd < 0)
        return;
    char one = 1;
    if (write(s.shed_fd, &one, 1) == 1)
        s.shed++;
}

void broker_fdreserve_accept_failed(int role, int err)
{
    if (!s.started || role < 0 || role > 1)
        return;
    s.failed[role]++;
    s.total_failed++;
    if (err == EMFILE || err == ENFILE)
        s.pending[role] = 1; /* acted on once per turn, in broker_fdreserve_handle */
}

static void s_act(int64_t now_ms)
{
    if (s.pending[BROKER_FDRESERVE_CLIENTS]) {
        /* A client is worth a descriptor: `status` must answer. The
         * reserve serves clients only, so shedding workers cannot use it up. */
        if (s_release_one() == 0)
            s.let_in++;
    }
    if (s.pending[BROKER_FDRESERVE_WORKERS]) {
        int lfd = s.listener[BROKER_FDRESERVE_WORKERS];
        if (lfd >= 0 && !s.closed_until) {
            s.closed_ms = s.closed_ms && now_ms - s.last_fail_ms < S_CLOSE_RESET_MS
                              ? (s.closed_ms * 2 > S_CLOSE_MAX_MS ? S_CLOSE_MAX_MS
                                                                  : s.closed_ms * 2)
                              : S_CLOSE_MIN_MS;
            if (s_filter(lfd, 1) == 0) {
                s.closed_until = now_ms + s.closed_ms;
                s.closed++;
            }
        }
        s_shed(BROKER_FDRESERVE_WORKERS); /* what completed before the filter */
        s.last_fail_ms = now_ms;
    }
    s.pending[0] = s.pending[1] = 0;
    if (s.closed_until && now_ms >= s.closed_until) {
        (void)s_filter(s.listener[BROKER_FDRESERVE_WORKERS], 0);
        s.closed_until = 0;
    }
}

int64_t broker_fdreserve_timeout_ms(int64_t now_ms)
{
    if (!s.closed_until)
        return -1;
    return s.closed_until > now_ms ? s.closed_until - now_ms : 0;
}

static void s_read_monitor(int role)
{
    for (int i = 0; i < 1024; i++) {
        zmq_msg_t frame;
        zmq_msg_init(&frame);
        if (zmq_msg_recv(&frame, s.monitor[role], ZMQ_DONTWAIT) < 0) {
            zmq_msg_close(&frame);
            return;
        }
        uint16_t event = 0;
        uint32_t value = 0;
        if (zmq_msg_size(&frame) >= 6) {
            memcpy(&event, zmq_msg_data(&frame), 2);
            memcpy(&value, (char *)zmq_msg_data(&frame) + 2, 4);
        }
        int more = zmq_msg_more(&frame);
        zmq_msg_close(&frame);
        while (more) {
            zmq_msg_init(&frame);
            more = zmq_msg_recv(&frame, s.monitor[role], 0) >= 0 && zmq_msg_more(&frame);
            zmq_msg_close(&frame);
        }
        if (event == ZMQ_EVENT_ACCEPT_FAILED)
            broker_fdreserve_accept_failed(role, (int)value);
        else
            broker_stats_connection_event(role == BROKER_FDRESERVE_WORKERS
                                              ? BROKER_STATS_WORKERS
                                              : BROKER_STATS_CLIENTS,
                                          event);
    }
}

void broker_fdreserve_handle(int64_t now_ms, int monitors_ready)
{
    if (!s.started)
        return;
    for (int r = 0; r < 2 && monitors_ready; r++)
        if (s.monitor[r])
            s_read_monitor(r);
    s_act(now_ms);
    if (s.n_reserve < BROKER_FDRESERVE_COUNT)
        s_refill();
    uint64_t failed = s.failed[0] + s.failed[1];
    if (failed && now_ms - s.last_log_ms >= BROKER_FDRESERVE_LOG_MS) {
        LOG_WARN("out of descriptors: %" PRIu64 " connections could not be accepted in the "
                 "last %d s (%" PRIu64 " clients, %" PRIu64 " workers); let %" PRIu64
                 " clients in from the reserve (%d of %d left), shed waiting worker "
                 "connections %" PRIu64 " times and closed the workers endpoint to new ones %"
                 PRIu64 " times (for %d ms now; they retry); connected peers are served. The "
                 "limit is %" PRIu64 " descriptors: raise the hard limit (ulimit -Hn, prlimit "
                 "--nofile, LimitNOFILE= in the systemd unit) and restart",
                 failed, BROKER_FDRESERVE_LOG_MS / 1000, s.failed[0], s.failed[1], s.let_in,
                 s.n_reserve, BROKER_FDRESERVE_COUNT, s.shed, s.closed, s.closed_ms,
                 common_fdlimit_soft());
        s.failed[0] = s.failed[1] = s.let_in = s.shed = s.closed = 0;
        s.last_log_ms = now_ms;
    }
}

void broker_fdreserve_stop(void)
{
    if (s.closed_until && s.listener[BROKER_FDRESERVE_WORKERS] >= 0)
        (void)s_filter(s.listener[BROKER_FDRESERVE_WORKERS], 0);
    for (int r = 0; r < 2; r++)
        if (s.monitor[r])
            zmq_close(s.monitor[r]);
    while (s.n_reserve > 0)
        close(s.reserve[--s.n_reserve]);
    if (s.shed_fd >= 0)
        close(s.shed_fd); /* the shedder reads end of file and exits */
    if (s.shedder > 0) {
        kill(s.shedder, SIGKILL);
        while (waitpid(s.shedder, NULL, 0) < 0 && errno == EINTR)
            ;
    }
    memset(&s, 0, sizeof s);
}
