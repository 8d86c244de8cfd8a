/* loop.c: broker_main_run, the one thread and its one zmq_poll loop. Each
 * turn: time-out from the nearest timer; at most BROKER_MSGS_PER_TURN messages
 * per socket (so neither starves the other); the due timers; then the
 * before-sleep step: dispatch queued jobs (one JOBS message per worker),
 * commit the store (the seam in store.h), and only then send ACCEPTED and the
 * batched RESULTS. Owns the sockets, the signal flag and the endpoints file. */
#include <errno.h>
#include <inttypes.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <zmq.h>

#include "broker.h"
#include "cache.h"
#include "client_io.h"
#include "common/fdlimit.h"
#include "common/clock.h"
#include "common/lifeline.h"
#include "common/replace_file.h"
#include "common/log.h"
#include "core.h"
#include "dispatch.h"
#include "envelope.h"
#include "fdreserve.h"
#include "guard.h"
#include "http.h"
#include "stats.h"
#include "store.h"
#include "store_check.h"
#include "pidfile.h"
#include "worker_io.h"

static volatile sig_atomic_t s_stop;
static volatile sig_atomic_t s_reload; /* SIGHUP: reload the allow-lists */

static void s_on_signal(int sig)
{
    if (sig == SIGHUP)
        s_reload = 1;
    else
        s_stop = 1;
}

static void *s_bind(broker_t *b, const char *endpoint, const char *role, char *bound, size_t n)
{
    void *sock = zmq_socket(b->ctx, ZMQ_ROUTER);
    if (!sock) {
        LOG_ERROR("cannot create the %s socket: %s", role, zmq_strerror(errno));
        return NULL;
    }
    int zero = 0, hwm = BROKER_HWM;
    int64_t maxmsg = PROTO_MAX_MESSAGE_BYTES;
    zmq_setsockopt(sock, ZMQ_ROUTER_MANDATORY, &zero, sizeof zero);
    zmq_setsockopt(sock, ZMQ_LINGER, &zero, sizeof zero);
    zmq_setsockopt(sock, ZMQ_MAXMSGSIZE, &maxmsg, sizeof maxmsg);
    zmq_setsockopt(sock, ZMQ_SNDHWM, &hwm, sizeof hwm);
    int rcvhwm = strcmp(role, "clients") == 0 ? BROKER_CLIENT_RCVHWM : hwm;
    zmq_setsockopt(sock, ZMQ_RCVHWM, &rcvhwm, sizeof rcvhwm);
    if (broker_guard_socket(b, sock, role) != 0) {
        zmq_close(sock);
        return NULL;
    }
    if (zmq_bind(sock, endpoint) != 0) {
        LOG_ERROR("cannot bind the %s endpoint %s: %s", role, endpoint, zmq_strerror(errno));
        zmq_close(sock);
        return NULL;
    }
    size_t len = n;
    if (zmq_getsockopt(sock, ZMQ_LAST_ENDPOINT, bound, &len) != 0)
        snprintf(bound, n, "%s", endpoint);
    LOG_INFO("listening for %s on %s", role, bound);
    return sock;
}

static int s_write_endpoints(const char *path, const char *clients, const char *workers,
                             const char *http)
{
    char text[2048];
    int n = snprintf(text, sizeof text, "clients %s\nworkers %s\n%s%s%s", clients, workers,
                     http[0] ? "http " : "", http, http[0] ? "\n" : "");
    if (n < 0 || (size_t)n >= sizeof text) {
        LOG_ERROR("cannot write the endpoints file %s: endpoints too long", path);
        return -1;
    }
    if (common_replace_file(path, text, (size_t)n, 1) != 0) {
        LOG_ERROR("cannot write the endpoints file %s: %s", path, strerror(errno));
        return -1;
    }
    return 0;
}

/* Handles up to BROKER_MSGS_PER_TURN waiting messages on one socket, and
 * stops early once the turn has taken BROKER_TURN_BUDGET_MS: a client
 * sending a batch of a million genomes filled one turn with 512 SUBMITs of
 * thousands of items each, and the turn took long enough (over 5 s) that
 * workers, hearing nothing, registered again. What is left waits in the
 * socket for the next turn, after this one's dispatch and commit. */
static void s_drain(broker_t *b, void *sock, int workers)
{
    int64_t until = common_clock_ms() + BROKER_TURN_BUDGET_MS;
    for (int i = 0; i < BROKER_MSGS_PER_TURN; i++) {
        if (i > 0 && common_clock_ms() >= until)
            break;
        uint8_t rid[BROKER_RID_MAX];
        size_t rid_len = 0;
        zmq_msg_t body;
        int got = broker_envelope_recv(sock, workers ? "worker" : "client", rid, &rid_len, &body);
        if (got == 0)
            break;
        if (got < 0) {
            b->dropped_msgs++;
            continue;
        }
        if (!broker_guard_admit(b, workers, rid, rid_len, &body)) {
            zmq_msg_close(&body);
            continue;
        }
        const uint8_t *data = zmq_msg_data(&body);
        size_t len = zmq_msg_size(&body);
        if (workers) {
            broker_worker_on_message(b, rid, rid_len, data, len);
            broker_guard_note_worker(b, rid, rid_len, &body);
        } else {
            broker_client_on_message(b, rid, rid_len,
                                     b->zap ? zmq_msg_gets(&body, "User-Id") : NULL, data, len);
        }
        zmq_msg_close(&body);
    }
}

/* Returns 0, or -1 when the store could not commit (nothing went out), or 1
 * when it held this turn's writes for the next turn (may_hold only).
 *
 * The hold (group commit across turns): while jobs are out on workers and
 * the oldest write an answer depends on is younger than
 * BROKER_COMMIT_HOLD_MS, the commit waits for the next turn, so results
 * that arrive close together share one fsync. A quick evaluation's result
 * arrives within the hold and one commit covers its request and its
 * result (its ACCEPTED and RESULTS go out together), and a generation of
 * quick evaluations, whose results come back in several messages, commits
 * them together rather than once per message. Nothing that depends on the
 * held writes goes out before they commit, so no guarantee changes; an
 * answer is at most BROKER_COMMIT_HOLD_MS (plus a turn) later, and with no
 * job out nothing is held. */
static int s_before_sleep(broker_t *b, int may_hold)
{
    /* A store that cannot write could not keep the results of new jobs:
     * the running ones finish and wait in memory, nothing more is sent. */
    if (!b->stopping && !broker_store_failing(b->store)) {
        broker_dispatch_turn(b);
        broker_speculate_turn(b); /* spare credits take copies of stragglers */
    }
    if (may_hold && !b->stopping && b->runs.total_running > 0 &&
        !broker_store_failing(b->store)) {
        int64_t waited = broker_store_waiting_us(b->store, common_clock_us());
        if (waited >= 0 && waited < (int64_t)BROKER_COMMIT_HOLD_MS * 1000)
            return 1;
    }
    /* Only acknowledgements wait (store.h): no answer depends on them, so
     * what is queued is durable already and goes out; they commit with the
     * next turn's writes, or when their time is up (the poll time-out). */
    if (!b->stopping && broker_store_commit_due_in_ms(b->store, common_clock_ms()) > 0) {
        b->runs.epoch++;
        broker_client_flush(b);
        return 0;
    }
    if (broker_store_commit(b->store) != 0) {
        /* Nothing that depends on it may go out (store.c logs, rate-limited),
         * but a client waiting for this turn's ACCEPTED hears why. */
        broker_client_tell_store_failing(b);
        return -1;
    }
    b->runs.epoch++; /* every answer so far is durable (runs.h) */
    broker_client_flush(b);
    if (b->runs.went_idle) {
        b->runs.went_idle = 0;
        broker_cache_log(b);
    }
    return 0;
}

/* 1 if any of items[from..to) has something to read. */
static int s_any_readable(const zmq_pollitem_t *items, int from, int to)
{
    for (int i = from; i < to; i++)
        if (items[i].revents & (ZMQ_POLLIN | ZMQ_POLLERR))
            return 1;
    return 0;
}

int broker_main_run(const broker_config_t *config)
{
    int rc = 1;
    broker_t b;
    char clients_ep[512] = "", workers_ep[512] = "", http_url[128] = "";
    struct sigaction sa, old_term, old_int, old_hup;

    if (!config || !config->clients_endpoint || !config->workers_endpoint) {
        LOG_ERROR("both a clients and a workers endpoint are required");
        return 1;
    }
    common_log_set_tag("broker");
    char perr[1024];
    int wrote_pid = 0;
    if (config->pid_file && broker_pidfile_check(config->pid_file, perr, sizeof perr) != 0) {
        LOG_ERROR("not starting: %s", perr);
        return 1;
    }
    broker_core_init_config(&b, config);
    b.now_ms = common_clock_ms();
    broker_store_check_t *check = NULL;

    s_stop = 0;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = s_on_signal;
    sigemptyset(&sa.sa_mask);
    sigaction(SIGTERM, &sa, &old_term);
    sigaction(SIGINT, &sa, &old_int);
    s_reload = 0;
    sigaction(SIGHUP, &sa, &old_hup);
    if (!b.store) {
        LOG_ERROR("cannot start without the store%s%s", config->store_dir ? " in " : "",
                  config->store_dir ? config->store_dir : "");
        goto cleanup;
    }

    b.ctx = zmq_ctx_new();
    if (!b.ctx) {
        LOG_ERROR("cannot create a ZeroMQ context: %s", zmq_strerror(errno));
        goto cleanup;
    }
    if (broker_guard_start(&b, config) != 0)
        goto cleanup;
    (void)common_fdlimit_raise("broker");
    broker_stats_connections_reset();
    broker_fdreserve_start();
    b.clients = s_bind(&b, config->clients_endpoint, "clients", clients_ep, sizeof clients_ep);
    if (!b.clients)
        goto cleanup;
    broker_fdreserve_watch(b.ctx, b.clients, BROKER_FDRESERVE_CLIENTS, clients_ep, !b.zap);
    b.workers = s_bind(&b, config->workers_endpoint, "workers", workers_ep, sizeof workers_ep);
    if (!b.workers)
        goto cleanup;
    broker_fdreserve_watch(b.ctx, b.workers, BROKER_FDRESERVE_WORKERS, workers_ep, !b.zap);
    if (config->http_address &&
        !(b.http = broker_http_new(&b, config->http_address, http_url, sizeof http_url)))
        goto cleanup;
    if (config->endpoints_file &&
        s_write_endpoints(config->endpoints_file, clients_ep, workers_ep, http_url) != 0)
        goto cleanup;
    if (config->pid_file) {
        if (broker_pidfile_write(config->pid_file, perr, sizeof perr) != 0) {
            LOG_ERROR("%s; stopping", perr);
            goto cleanup;
        }
        wrote_pid = 1;
    }
    LOG_INFO("broker ready: liveness %d ms, heartbeat %d ms, %u attempts per job; in RAM at "
             "most %" PRIu64 " cached results (~%" PRIu64 " MiB) and %" PRIu64
             " results per run awaiting acknowledgement (%" PRIu64 " in all)",
             b.liveness_ms, b.heartbeat_ms, b.attempts, b.evals.cap_entries,
             b.evals.cap_bytes >> 20, b.runs.max_per_run, b.runs.max_total);

    broker_worker_timers_start(&b);
    /* clients, workers, ZAP's 3, the descriptor reserve's 2, http, lifeline,
     * the store's check */
    zmq_pollitem_t items[10] = {
        {.socket = b.clients, .events = ZMQ_POLLIN},
        {.socket = b.workers, .events = ZMQ_POLLIN},
    };
    int n_items = 2 + (b.zap ? broker_zap_pollitems(b.zap, items + 2, 3) : 0);
    const int zap_end = n_items;
    n_items += broker_fdreserve_pollitems(items + n_items, 2);
    const int reserve_end = n_items;
    int http = -1; /* its index in items */
    if (b.http) {
        http = n_items++;
        items[http] = (zmq_pollitem_t){.fd = broker_http_fd(b.http), .events = ZMQ_POLLIN};
    }
    int lifeline = -1; /* its index in items */
    if (config->lifeline_fd > 0) {
        lifeline = n_items++;
        items[lifeline] = (zmq_pollitem_t){.fd = config->lifeline_fd, .events = ZMQ_POLLIN};
    }
    /* The load read the pages of the pending work (store_check.h); the rest
     * is checked while the broker serves. A scratch file is new. Started
     * last, after the descriptor reserve's fork (fdreserve.c), so that no
     * process forks while the check's thread runs. */
    if (config->store_dir && !config->scratch_store)
        check = broker_store_check_start(broker_store_path(b.store));
    int checking = -1; /* its index in items while the store's check runs */
    if (check) {
        checking = n_items++;
        items[checking] =
            (zmq_pollitem_t){.fd = broker_store_check_fd(check), .events = ZMQ_POLLIN};
    }
    int damaged = 0; /* the check found the store damaged: stop, exit non-zero */
    int holding = 0; /* this turn's commit was left to the next (s_before_sleep) */
    while (!s_stop) {
        b.now_ms = common_clock_ms();
        long timeout = b.backlog_more ? 0 : broker_timers_timeout(&b.timers, b.now_ms);
        if (holding && (timeout < 0 || timeout > BROKER_COMMIT_HOLD_MS))
            timeout = BROKER_COMMIT_HOLD_MS; /* the held commit is made next turn */
        long lazy = broker_store_commit_due_in_ms(b.store, b.now_ms);
        if (lazy > 0 && (timeout < 0 || lazy < timeout))
            timeout = lazy; /* acknowledgements left waiting commit then */
        long retry = broker_store_retry_in_ms(b.store);
        if (retry >= 0 && (timeout < 0 || retry < timeout))
            timeout = retry; /* wake for the store's next retry */
        long spec = broker_speculate_timeout_ms(&b);
        if (spec >= 0 && (timeout < 0 || spec < timeout))
            timeout = spec; /* a running job may become a straggler then */
        int64_t reopen = broker_fdreserve_timeout_ms(b.now_ms);
        if (reopen >= 0 && (timeout < 0 || reopen < timeout))
            timeout = (long)reopen;
        long http_in = broker_http_timeout_ms(b.http);
        if (http_in >= 0 && (timeout < 0 || http_in < timeout))
            timeout = http_in; /* its connection time-outs, or work left over */
        if (s_reload) {
            s_reload = 0;
            broker_guard_reload(&b);
        }
        if (zmq_poll(items, n_items, timeout) < 0) {
            if (errno == EINTR)
                continue;
            LOG_ERROR("zmq_poll failed: %s", zmq_strerror(errno));
            goto cleanup;
        }
        b.now_ms = common_clock_ms();
        if (lifeline >= 0 && (items[lifeline].revents & (ZMQ_POLLIN | ZMQ_POLLERR)) &&
            common_lifeline_gone(config->lifeline_fd)) {
            /* The process that started this pool died: nobody else will stop us. */
            LOG_INFO("the lifeline closed (the process that started this broker let go or is gone); "
                     "stopping");
            s_stop = 1;
        }
        if (checking >= 0 && (items[checking].revents & ZMQ_POLLIN)) {
            /* The last item: dropping it leaves the others where they are. */
            n_items--;
            checking = -1;
            if (broker_store_check_finish(&check)) {
                LOG_ERROR("stopping: the store's check found it damaged (above)");
                damaged = 1;
                s_stop = 1;
            }
        }
        /* Only sockets the poll found readable are read: every call on a
         * ZeroMQ socket costs a poll of its mailbox (and a getpid), and with
         * one result per turn (evaluations of milliseconds) reading the idle
         * ones every turn was about a tenth of the broker's polls. zmq_poll
         * reports a ZeroMQ socket's readiness level-triggered, so nothing
         * waiting is missed. */
        if (b.zap && s_any_readable(items, 2, zap_end))
            broker_zap_handle(b.zap); /* handshakes first: admitted peers then speak */
        /* accepts that failed for want of descriptors */
        broker_fdreserve_handle(b.now_ms, s_any_readable(items, zap_end, reserve_end));
        /* Every turn, not only when its descriptor is readable or its time-out
         * is due: after closing connections at its limit libmicrohttpd takes
         * the listener back into its epoll set only in a later run, with
         * nothing to wake us for it (a non-blocking epoll_wait costs little).
         * On this thread: its pages read broker state. */
        if (http >= 0)
            broker_http_run(b.http);
        if (items[0].revents & ZMQ_POLLIN)
            s_drain(&b, b.clients, 0);
        if (items[1].revents & ZMQ_POLLIN)
            s_drain(&b, b.workers, 1);
        broker_timers_run(&b.timers, b.now_ms);
        holding = s_before_sleep(&b, 1) == 1;
    }
    /* Stop accepting; what this process owes goes out before the sockets close. */
    b.stopping = 1;
    broker_store_retry_now(b.store); /* a failing store gets its last try now */
    if (s_before_sleep(&b, 0) != 0) {
        /* Their requests are durable (accepted only after commit), so a
         * restarted broker queues them again: nothing accepted is lost, but
         * the stop was not clean and the exit status says so. */
        char why[1024];
        broker_store_describe(b.store, why, sizeof why);
        LOG_ERROR("broker stopping with %" PRIu64 " results not written (%s); their requests "
                  "are durable and are evaluated again when a broker restarts on this store",
                  broker_store_unwritten(b.store), why);
        rc = 1;
    } else {
        rc = 0;
    }
    if (damaged)
        rc = 1;
    uint64_t commits = broker_store_commits(b.store);
    LOG_INFO("broker stopping: %" PRIu64 " jobs sent, %" PRIu64 " results sent, %" PRIu64
             " messages dropped; %" PRIu64 " store commits taking %.1f s (%.0f us each)",
             b.jobs_sent, b.results_sent, b.dropped_msgs, commits,
             broker_store_commit_seconds(b.store),
             commits ? broker_store_commit_seconds(b.store) * 1e6 / (double)commits : 0.0);
    broker_cache_log(&b);

cleanup:
    if (b.clients || b.workers) {
        int linger = rc == 0 ? 200 : 0; /* a short grace for the final flush */
        if (b.clients) {
            zmq_setsockopt(b.clients, ZMQ_LINGER, &linger, sizeof linger);
            zmq_close(b.clients);
        }
        if (b.workers) {
            zmq_setsockopt(b.workers, ZMQ_LINGER, &linger, sizeof linger);
            zmq_close(b.workers);
        }
    }
    (void)broker_store_check_finish(&check); /* interrupted if still running */
    broker_http_destroy(&b.http);
    broker_guard_stop(&b);
    broker_fdreserve_stop();
    if (b.ctx)
        zmq_ctx_term(b.ctx);
    broker_core_fini(&b);
    sigaction(SIGTERM, &old_term, NULL);
    sigaction(SIGINT, &old_int, NULL);
    sigaction(SIGHUP, &old_hup, NULL);
    if (wrote_pid)
        broker_pidfile_remove(config->pid_file);
    return rc;
}
