/* handshake.c: the worker's handshake monitor (handshake.h). */
#include "handshake.h"

#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>
#include <zmq.h>

#include "common/clock.h"
#include "common/log.h"

int worker_handshake_open(worker_handshake_t *h, void *ctx, void *sock, const char *endpoint)
{
    memset(h, 0, sizeof *h);
    h->endpoint = endpoint;
    char ep[64];
    snprintf(ep, sizeof ep, "inproc://fitfarm-worker-monitor-%ld", (long)getpid());
    int events = ZMQ_EVENT_HANDSHAKE_FAILED_NO_DETAIL | ZMQ_EVENT_HANDSHAKE_FAILED_PROTOCOL |
                 ZMQ_EVENT_HANDSHAKE_FAILED_AUTH | ZMQ_EVENT_HANDSHAKE_SUCCEEDED;
    int zero = 0;
    if (zmq_socket_monitor(sock, ep, events) != 0 || !(h->pair = zmq_socket(ctx, ZMQ_PAIR)) ||
        zmq_setsockopt(h->pair, ZMQ_LINGER, &zero, sizeof zero) != 0 ||
        zmq_connect(h->pair, ep) != 0) {
        LOG_WARN("cannot watch the handshakes with %s (%s): a refusal by the broker will not "
                 "be logged",
                 endpoint, zmq_strerror(zmq_errno()));
        worker_handshake_close(h);
        return -1;
    }
    return 0;
}

static const char *s_why(uint16_t event, uint32_t value)
{
    if (event == ZMQ_EVENT_HANDSHAKE_FAILED_AUTH)
        return value == 400 ? "the broker refused this worker's key (is its public key on the "
                              "broker's workers.allow? fitfarm allow worker NAME.public, then "
                              "SIGHUP the broker)"
                            : "the broker's authentication failed";
    if (event == ZMQ_EVENT_HANDSHAKE_FAILED_PROTOCOL)
        return "the CURVE handshake failed (a wrong --broker-key, or a plaintext broker)";
    return "the handshake failed (a wrong --broker-key, a plaintext broker, or not a fitfarm "
           "broker)";
}

void worker_handshake_handle(worker_handshake_t *h)
{
    if (!h->pair)
        return;
    for (int i = 0; i < 64; i++) {
        zmq_msg_t frame;
        zmq_msg_init(&frame);
        if (zmq_msg_recv(&frame, h->pair, ZMQ_DONTWAIT) < 0) {
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
        while (more) { /* the endpoint frame */
            zmq_msg_init(&frame);
            more = zmq_msg_recv(&frame, h->pair, 0) >= 0 && zmq_msg_more(&frame);
            zmq_msg_close(&frame);
        }
        int64_t now = common_clock_ms();
        if (event == ZMQ_EVENT_HANDSHAKE_SUCCEEDED) {
            if (h->refused)
                LOG_INFO("handshake with %s succeeded after %" PRIu64 " refusals", h->endpoint,
                         h->quiet + 1);
            h->refused = 0;
            h->quiet = 0;
            h->last_log_ms = 0;
            continue;
        }
        if (h->refused && now - h->last_log_ms < WORKER_HANDSHAKE_QUIET_MS) {
            h->quiet++;
            continue;
        }
        if (h->quiet)
            LOG_ERROR("%s: %s; still retrying (%" PRIu64 " more refusals since the last line)",
                      h->endpoint, s_why(event, value), h->quiet);
        else
            LOG_ERROR("%s: %s; retrying", h->endpoint, s_why(event, value));
        h->refused = 1;
        h->quiet = 0;
        h->last_log_ms = now;
    }
}

void worker_handshake_close(worker_handshake_t *h)
{
    if (h->pair)
        zmq_close(h->pair);
    h->pair = NULL;
}
