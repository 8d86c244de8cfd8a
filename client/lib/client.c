/* client.c: the client object and its transport: the connection to a broker
 * (remote or the embedded pool's), the handshake, the outbox of encoded
 * messages the core emitted and its flush to the socket, and the message
 * pump that decodes what the broker says and feeds it to the core (run.c).
 * Also the pollable descriptor for callers' own loops, and the last-error
 * sentence.
 *
 * Not here: runs, chunks and results (run.c), batches (batch.c), the outbox
 * itself (core.c), waiting (blocking.c), the embedded pool's processes
 * (pool.c).
 *
 * Reconnection is ZeroMQ's: the DEALER socket reconnects by itself (100 ms,
 * backing off to 2 s) and ZMTP heartbeats drop a half-open TCP connection. A
 * socket monitor tells us when a connection came back after a drop; the runs
 * then re-send their unfinished SUBMITs, because a restarted broker without a
 * store has forgotten them (re-sends are harmless: the broker keeps one
 * evaluation per key and we drop duplicate results by tag). */
#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <zmq.h>

#include "client.h"
#include "common/clock.h"
#include "run.h"
#include "secure.h"

#define CLIENT_DEFAULT_CONNECT_MS 10000
#define CLIENT_HWM 100000
#define CLIENT_PROBE_MS 250  /* STATUS_REQ interval during the handshake */
#define CLIENT_PROBE_LOCAL_MS 5 /* the same for the embedded pool (ipc, local) */
#define CLIENT_PUMP_BURST 256 /* messages handled per pump call */
#define CLIENT_MONITOR_EP "inproc://fitfarm-client-monitor"

int client_fail(fitfarm_client_t *self, int code, const char *fmt, ...)
{
    if (self) {
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(self->core.err, sizeof self->core.err, fmt, ap);
        va_end(ap);
    }
    return code;
}

int64_t client_deadline(int timeout_ms)
{
    return timeout_ms < 0 ? -1 : common_clock_ms() + timeout_ms;
}

int client_ms_left(int64_t deadline)
{
    if (deadline < 0)
        return -1;
    int64_t left = deadline - common_clock_ms();
    if (left < 0)
        return 0;
    return left > 1000000000 ? 1000000000 : (int)left;
}

static int s_setsockopt_int(void *sock, int option, int value)
{
    return zmq_setsockopt(sock, option, &value, sizeof value);
}

/* Creates the context, the DEALER socket and its monitor, and connects. */
static int s_connect(fitfarm_client_t *self, const fitfarm_options_t *options)
{
    self->zctx = zmq_ctx_new();
    if (!self->zctx)
        return client_fail(self, FITFARM_ESYSTEM, "cannot create a ZeroMQ context: %s",
                           zmq_strerror(errno));
    self->sock = zmq_socket(self->zctx, ZMQ_DEALER);
    if (!self->sock)
        return client_fail(self, FITFARM_ESYSTEM, "cannot create a ZeroMQ socket: %s",
                           zmq_strerror(errno));
    int64_t maxmsg = (int64_t)self->limits.message_bytes;
    /* A broker on this machine (the embedded pool) may be a few ms from
     * binding: retry quickly rather than after ZeroMQ's usual 100 ms. */
    int local = strncmp(self->endpoint, "ipc://", 6) == 0;
    if (s_setsockopt_int(self->sock, ZMQ_LINGER, 0) != 0 ||
        s_setsockopt_int(self->sock, ZMQ_RECONNECT_IVL, local ? 5 : 100) != 0 ||
        s_setsockopt_int(self->sock, ZMQ_RECONNECT_IVL_MAX, 2000) != 0 ||
        s_setsockopt_int(self->sock, ZMQ_SNDHWM, CLIENT_HWM) != 0 ||
        s_setsockopt_int(self->sock, ZMQ_RCVHWM, CLIENT_HWM) != 0 ||
        s_setsockopt_int(self->sock, ZMQ_HEARTBEAT_IVL, 1000) != 0 ||
        s_setsockopt_int(self->sock, ZMQ_HEARTBEAT_TIMEOUT, 5000) != 0 ||
        zmq_setsockopt(self->sock, ZMQ_MAXMSGSIZE, &maxmsg, sizeof maxmsg) != 0)
        return client_fail(self, FITFARM_ESYSTEM, "cannot set socket options: %s",
                           zmq_strerror(errno));
    if (zmq_socket_monitor(self->sock, CLIENT_MONITOR_EP,
                           ZMQ_EVENT_CONNECTED | ZMQ_EVENT_DISCONNECTED |
                               ZMQ_EVENT_HANDSHAKE_SUCCEEDED | ZMQ_EVENT_HANDSHAKE_FAILED_NO_DETAIL |
                               ZMQ_EVENT_HANDSHAKE_FAILED_PROTOCOL |
                               ZMQ_EVENT_HANDSHAKE_FAILED_AUTH) != 0)
        return client_fail(self, FITFARM_ESYSTEM, "cannot monitor the socket: %s",
                           zmq_strerror(errno));
    self->monitor = zmq_socket(self->zctx, ZMQ_PAIR);
    if (!self->monitor || s_setsockopt_int(self->monitor, ZMQ_LINGER, 0) != 0 ||
        zmq_connect(self->monitor, CLIENT_MONITOR_EP) != 0)
        return client_fail(self, FITFARM_ESYSTEM, "cannot connect the socket monitor: %s",
                           zmq_strerror(errno));
    int src = client_secure_socket(self, self->sock, options);
    if (src != FITFARM_OK)
        return src;
    if (zmq_connect(self->sock, self->endpoint) != 0)
        return client_fail(self, FITFARM_ECONNECT, "cannot connect to the broker at %s: %s",
                           self->endpoint, zmq_strerror(errno));
    return FITFARM_OK;
}

int client_flush(fitfarm_client_t *self, int timeout_ms)
{
    int64_t deadline = client_deadline(timeout_ms);
    const client_frame_t *f;
    while ((f = client_core_peek_frame(&self->core)) != NULL) {
        if (zmq_send(self->sock, f->buf, f->len, ZMQ_DONTWAIT) >= 0) {
            client_core_drop_frame(&self->core);
            continue;
        }
        if (errno != EAGAIN && errno != EINTR)
            return client_fail(self, FITFARM_ECONNECT, "cannot send to the broker at %s: %s",
                               self->endpoint, zmq_strerror(errno));
        int left = client_ms_left(deadline);
        if (left == 0)
            return timeout_ms == 0 ? FITFARM_OK
                                   : client_fail(self, FITFARM_ETIMEDOUT,
                                                 "the broker at %s did not take %zu queued "
                                                 "messages in time", self->endpoint,
                                                 self->core.out_len);
        zmq_pollitem_t item = {self->sock, 0, ZMQ_POLLOUT, 0};
        zmq_poll(&item, 1, left < 0 || left > 100 ? 100 : left);
    }
    return FITFARM_OK;
}

static void s_on_monitor(fitfarm_client_t *self)
{
    for (;;) {
        zmq_msg_t frame;
        zmq_msg_init(&frame);
        if (zmq_msg_recv(&frame, self->monitor, ZMQ_DONTWAIT) < 0) {
            zmq_msg_close(&frame);
            return;
        }
        uint16_t event = 0;
        uint32_t value = 0;
        int first = zmq_msg_size(&frame) >= 6;
        if (first) {
            memcpy(&event, zmq_msg_data(&frame), sizeof event);
            memcpy(&value, (const uint8_t *)zmq_msg_data(&frame) + 2, sizeof value);
        }
        int more = zmq_msg_more(&frame);
        zmq_msg_close(&frame);
        while (more) { /* the endpoint frame */
            zmq_msg_init(&frame);
            if (zmq_msg_recv(&frame, self->monitor, 0) < 0)
                more = 0;
            else
                more = zmq_msg_more(&frame);
            zmq_msg_close(&frame);
        }
        if (!first)
            continue;
        if (event == ZMQ_EVENT_DISCONNECTED) {
            self->disconnected = 1;
        } else if (event == ZMQ_EVENT_CONNECTED) {
            self->hs_connects++;
            if (self->disconnected) {
                self->disconnected = 0;
                self->reconnected = 1;
            }
        } else if (event == ZMQ_EVENT_HANDSHAKE_SUCCEEDED) {
            self->hs_succeeded++;
            self->hs_failed_event = 0;
            self->hs_failed_runs = 0;
        } else {
            self->hs_failed_event = event;
            self->hs_failed_value = value;
            self->hs_failed_runs++;
        }
    }
}

static void s_dispatch(fitfarm_client_t *self, proto_msg_t **msg_p)
{
    proto_msg_t *msg = *msg_p;
    if (client_runs_on_message(&self->core, msg))
        return;
    if (msg->type == PROTO_STATUS) {
        proto_msg_destroy(&self->status);
        self->status = msg;
        self->status_count++;
        *msg_p = NULL;
    }
    /* else HEARTBEAT, or anything a client has no use for */
}

/* Receives one message without blocking; returns 1 if one was handled, 0 if
 * none was waiting. Undecodable messages are dropped (a client cannot ask a
 * broker to behave; it can only refuse to trust it). */
static int s_recv_one(fitfarm_client_t *self)
{
    zmq_msg_t frame;
    zmq_msg_init(&frame);
    if (zmq_msg_recv(&frame, self->sock, ZMQ_DONTWAIT) < 0) {
        zmq_msg_close(&frame);
        return 0;
    }
    int multipart = zmq_msg_more(&frame);
    if (!multipart) {
        proto_msg_t *msg = NULL;
        if (proto_msg_decode(zmq_msg_data(&frame), zmq_msg_size(&frame), &self->limits, &msg,
                             NULL) == PROTO_OK) {
            s_dispatch(self, &msg);
            proto_msg_destroy(&msg);
        }
    }
    zmq_msg_close(&frame);
    while (multipart) { /* not our protocol: drain the rest */
        zmq_msg_init(&frame);
        multipart = zmq_msg_recv(&frame, self->sock, 0) >= 0 && zmq_msg_more(&frame);
        zmq_msg_close(&frame);
    }
    return 1;
}

int client_pump(fitfarm_client_t *self, int timeout_ms)
{
    int frc = client_flush(self, 0);
    if (frc != FITFARM_OK)
        return frc;
    zmq_pollitem_t items[2] = {
        {self->sock, 0, ZMQ_POLLIN, 0},
        {self->monitor, 0, ZMQ_POLLIN, 0},
    };
    int n = zmq_poll(items, 2, timeout_ms < 0 ? -1 : timeout_ms);
    if (n < 0) {
        if (errno == EINTR)
            return 0;
        return client_fail(self, FITFARM_ESYSTEM, "waiting for the broker failed: %s",
                           zmq_strerror(errno));
    }
    int handled = 0;
    if (items[1].revents & ZMQ_POLLIN) {
        s_on_monitor(self);
        handled = 1;
    }
    if (items[0].revents & ZMQ_POLLIN)
        for (int i = 0; i < CLIENT_PUMP_BURST && s_recv_one(self); i++)
            handled = 1;
    int all = self->reconnected;
    self->reconnected = 0;
    client_runs_resend_due(&self->core, common_clock_ms(), all);
    /* What the messages produced (acknowledgements, re-sends) goes out now. */
    frc = client_flush(self, 0);
    return frc != FITFARM_OK ? frc : handled;
}

static int s_send_status_req(fitfarm_client_t *self)
{
    proto_msg_t msg;
    memset(&msg, 0, sizeof msg);
    msg.type = PROTO_STATUS_REQ;
    int rc = client_core_emit(&self->core, &msg);
    return rc != FITFARM_OK ? rc : client_flush(self, 1000);
}

int client_status(fitfarm_client_t *self, proto_msg_t **status_out, int timeout_ms)
{
    if (!self || !status_out)
        return FITFARM_EINVAL;
    *status_out = NULL;
    int64_t deadline = client_deadline(timeout_ms);
    uint64_t seen = self->status_count;
    int64_t next_probe = 0;
    while (self->status_count == seen) {
        int64_t now = common_clock_ms();
        /* Ask again now and then: a request sent into a dropped connection is lost. */
        if (now >= next_probe) {
            int rc = s_send_status_req(self);
            if (rc != FITFARM_OK && rc != FITFARM_ETIMEDOUT)
                return rc;
            next_probe = now + 1000;
        }
        int left = client_ms_left(deadline);
        if (left == 0)
            return client_fail(self, FITFARM_ETIMEDOUT,
                               "no STATUS from the broker at %s within %d ms", self->endpoint,
                               timeout_ms);
        int wait = (int)(next_probe - now);
        if (left >= 0 && left < wait)
            wait = left;
        int rc = client_pump(self, wait);
        if (rc < 0)
            return rc;
        if (self->pool) {
            rc = client_pool_check(self->pool, self->core.err, sizeof self->core.err);
            if (rc != FITFARM_OK)
                return rc;
        }
    }
    *status_out = self->status;
    self->status = NULL;
    return FITFARM_OK;
}

/* Why the broker has not answered, from the socket's handshake events
 * (libzmq's monitor: ZMQ_EVENT_HANDSHAKE_FAILED_AUTH carries the ZAP status
 * code, _PROTOCOL a ZMQ_PROTOCOL_ERROR_* code). Writes a sentence that says
 * what to do and returns 1 when the handshake is known to have failed (final:
 * waiting longer will not help), 0 when nothing is known. */
static int s_handshake_reason(const fitfarm_client_t *self, char *buf, size_t len)
{
    buf[0] = '\0';
    if (self->hs_failed_event == ZMQ_EVENT_HANDSHAKE_FAILED_AUTH) {
        snprintf(buf, len, "the broker at %s refused this client's key (fingerprint %s, ZAP "
                 "status %u): ask the broker's operator to run 'fitfarm allow client "
                 "YOUR.public --keys DIR' and send it SIGHUP",
                 self->endpoint, self->curve ? self->fingerprint : "none",
                 (unsigned)self->hs_failed_value);
        return 1;
    }
    if (self->hs_failed_event == ZMQ_EVENT_HANDSHAKE_FAILED_PROTOCOL &&
        self->hs_failed_value == ZMQ_PROTOCOL_ERROR_ZMTP_MECHANISM_MISMATCH) {
        if (self->curve)
            snprintf(buf, len, "the broker at %s does not use CURVE (it was started with "
                     "--insecure) while this client does: use --insecure here too (loopback "
                     "only), or restart the broker with its key", self->endpoint);
        else
            snprintf(buf, len, "the broker at %s speaks CURVE; this client was started "
                     "with --insecure: give it --key YOUR.secret and --broker-key "
                     "broker.public", self->endpoint);
        return 1;
    }
    if (self->hs_failed_event != 0) {
        /* The broker closed the connection mid-handshake without a reason:
         * with CURVE, it could not open our HELLO (another broker key);
         * without, it expects CURVE. Once could be a broker going down;
         * three times in a row is a setting. */
        if (self->curve)
            snprintf(buf, len, "the broker at %s ends the CURVE handshake (%u time(s)): either "
                     "its key is not the one in %s (ask its operator for the broker's public "
                     "key), or it runs without CURVE (--insecure)", self->endpoint,
                     self->hs_failed_runs, self->broker_key_file);
        else
            snprintf(buf, len, "the broker at %s ends the handshake (%u time(s)): it probably "
                     "speaks CURVE while this client was started with --insecure; give it "
                     "--key YOUR.secret and --broker-key broker.public",
                     self->endpoint, self->hs_failed_runs);
        return self->hs_failed_runs >= 3;
    }
    if (self->curve && self->hs_connects > 0 && self->hs_succeeded == 0) {
        /* The broker drops a CURVE HELLO it cannot open without telling us:
         * connected, never authenticated. */
        snprintf(buf, len, "connected to %s %u time(s) but the CURVE handshake never "
                 "completed: the broker's key is probably not the one in %s (or the endpoint "
                 "is not a fitfarm broker's client endpoint)",
                 self->endpoint, self->hs_connects, self->broker_key_file);
        return 0;
    }
    return 0;
}

/* Waits for the first STATUS; for the embedded pool, for one with a worker. */
static int s_handshake(fitfarm_client_t *self)
{
    int64_t deadline = client_deadline(self->connect_timeout_ms);
    int64_t next_probe = 0;
    for (;;) {
        if (self->status && (!self->pool || self->status->u.status.n_workers > 0))
            return FITFARM_OK;
        int64_t now = common_clock_ms();
        if (now >= next_probe) {
            int rc = s_send_status_req(self);
            if (rc != FITFARM_OK && rc != FITFARM_ETIMEDOUT)
                return rc;
            /* The embedded pool is on this machine and comes up in tens of
             * milliseconds: ask often, so its start is not rounded up. */
            next_probe = now + (self->pool ? CLIENT_PROBE_LOCAL_MS : CLIENT_PROBE_MS);
        }
        if (self->pool) {
            int rc = client_pool_check(self->pool, self->core.err, sizeof self->core.err);
            if (rc != FITFARM_OK)
                return rc;
        }
        char why[CLIENT_ERR_BYTES];
        if (s_handshake_reason(self, why, sizeof why) == 1)
            return client_fail(self, FITFARM_ECONNECT, "%s", why);
        int left = client_ms_left(deadline);
        if (left == 0) {
            if (s_handshake_reason(self, why, sizeof why) == 0 && why[0])
                return client_fail(self, FITFARM_ECONNECT, "%s", why);
            if (self->pool)
                return client_fail(self, FITFARM_ECONNECT,
                                   "the embedded pool did not come up within %d ms: %s",
                                   self->connect_timeout_ms,
                                   self->status ? "no worker registered with the broker"
                                                : "its broker did not answer");
            return client_fail(self, FITFARM_ECONNECT,
                               "no answer from a broker at %s within %d ms (is fitfarm-broker "
                               "running there, and is this its client endpoint?)",
                               self->endpoint, self->connect_timeout_ms);
        }
        int wait = (int)(next_probe - now);
        if (wait < 0)
            wait = 0;
        if (left < wait)
            wait = left;
        int rc = client_pump(self, wait);
        if (rc < 0)
            return rc;
    }
}

FITFARM_API int fitfarm_client_new(const fitfarm_options_t *caller_options,
                                   fitfarm_client_t **out, char *errbuf, size_t errlen)
{
    if (errbuf && errlen)
        errbuf[0] = '\0';
    if (!out || !caller_options || caller_options->size == 0) {
        if (errbuf && errlen)
            snprintf(errbuf, errlen, "fitfarm_client_new: %s",
                     !out || !caller_options ? "options and out must not be NULL"
                                             : "options.size is 0: initialise the options with "
                                               "FITFARM_OPTIONS_INIT");
        if (out)
            *out = NULL;
        return FITFARM_EINVAL;
    }
    fitfarm_options_t opts;
    CLIENT_COPY_IN(opts, caller_options);
    const fitfarm_options_t *options = &opts;
    *out = NULL;
    int rc = FITFARM_OK;
    fitfarm_client_t *self = calloc(1, sizeof *self);
    if (!self) {
        if (errbuf && errlen)
            snprintf(errbuf, errlen, "out of memory creating a client");
        return FITFARM_ENOMEM;
    }
    self->limits = proto_limits_default();
    self->connect_timeout_ms =
        options->connect_timeout_ms > 0 ? options->connect_timeout_ms : CLIENT_DEFAULT_CONNECT_MS;
    client_core_init(&self->core);

    if (options->broker) {
        if (!*options->broker) {
            rc = client_fail(self, FITFARM_EINVAL, "the broker endpoint is empty");
            goto cleanup;
        }
        self->endpoint = strdup(options->broker);
    } else {
        /* The daemons as child programs on private ipc endpoints (pool.c). */
        rc = client_pool_new(options, &self->pool, self->core.err, sizeof self->core.err);
        if (rc != FITFARM_OK)
            goto cleanup;
        self->endpoint = strdup(client_pool_endpoint(self->pool));
    }
    if (!self->endpoint) {
        rc = client_fail(self, FITFARM_ENOMEM, "out of memory creating a client");
        goto cleanup;
    }
    rc = s_connect(self, options);
    if (rc == FITFARM_OK)
        rc = s_handshake(self);
cleanup:
    if (rc != FITFARM_OK) {
        if (errbuf && errlen)
            snprintf(errbuf, errlen, "%s",
                     self->core.err[0] ? self->core.err : fitfarm_strerror(rc));
        fitfarm_client_destroy(&self);
    }
    *out = self;
    return rc;
}

FITFARM_API void fitfarm_client_destroy(fitfarm_client_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    fitfarm_client_t *self = *self_p;
    /* Runs outlived their client (caller misuse): make them fail cleanly. */
    client_runs_detach(&self->core);
    if (self->sock) {
        zmq_socket_monitor(self->sock, NULL, 0);
        zmq_close(self->sock);
    }
    if (self->monitor)
        zmq_close(self->monitor);
    if (self->zctx)
        zmq_ctx_term(self->zctx);
    client_pool_destroy(&self->pool);
    proto_msg_destroy(&self->status);
    client_core_fini(&self->core);
    free(self->endpoint);
    free(self);
    *self_p = NULL;
}

FITFARM_API const char *fitfarm_client_error(const fitfarm_client_t *self)
{
    if (!self)
        return "no client";
    return self->core.err;
}

FITFARM_API const char *fitfarm_client_endpoint(const fitfarm_client_t *self)
{
    return self && self->endpoint ? self->endpoint : "";
}

FITFARM_API int fitfarm_client_fd(fitfarm_client_t *self, int *fd)
{
    if (!self || !fd)
        return FITFARM_EINVAL;
    size_t len = sizeof *fd;
    if (zmq_getsockopt(self->sock, ZMQ_FD, fd, &len) != 0)
        return client_fail(self, FITFARM_ESYSTEM, "cannot read the socket's descriptor: %s",
                           zmq_strerror(errno));
    return FITFARM_OK;
}

FITFARM_API int fitfarm_client_next_timeout(fitfarm_client_t *self)
{
    if (!self)
        return -1;
    /* Work already waiting in the socket (ZMQ_FD is edge-triggered, so the
     * caller may not be woken for it again) or a reconnect to act on. */
    int events = 0;
    size_t len = sizeof events;
    if (self->reconnected ||
        (zmq_getsockopt(self->sock, ZMQ_EVENTS, &events, &len) == 0 && (events & ZMQ_POLLIN)))
        return 0;
    int64_t now = common_clock_ms(), next = client_runs_next_retry(&self->core);
    /* The monitor socket has no descriptor of the caller's: look at it
     * every 100 ms while a reconnect could be pending. */
    int poll_ms = self->core.runs ? 100 : -1;
    if (next < 0)
        return poll_ms;
    int64_t left = next > now ? next - now : 0;
    if (poll_ms >= 0 && left > poll_ms)
        left = poll_ms;
    return (int)left;
}

FITFARM_API int fitfarm_client_process(fitfarm_client_t *self)
{
    if (!self)
        return FITFARM_EINVAL;
    int handled = 0;
    for (;;) {
        int rc = client_pump(self, 0);
        if (rc < 0)
            return rc;
        if (rc == 0)
            break;
        handled++;
    }
    if (self->pool) {
        int rc = client_pool_check(self->pool, self->core.err, sizeof self->core.err);
        if (rc != FITFARM_OK)
            return rc;
    }
    return handled;
}

FITFARM_API int fitfarm_run_open(fitfarm_client_t *client,
                                 const fitfarm_run_options_t *caller_options, fitfarm_run_t **out)
{
    if (!out)
        return FITFARM_EINVAL;
    *out = NULL;
    if (!client || !caller_options)
        return FITFARM_EINVAL;
    if (caller_options->size == 0)
        return client_fail(client, FITFARM_EINVAL, "run options.size is 0: initialise them "
                           "with FITFARM_RUN_OPTIONS_INIT");
    fitfarm_run_options_t opts;
    CLIENT_COPY_IN(opts, caller_options);
    return client_run_new(&client->core, client, &opts, out);
}
