/* envelope.c: ROUTER envelope receive and send (see envelope.h). Owns no
 * state; the encoded buffer of a send is handed to ZeroMQ, which frees it. */
#include "envelope.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>

#include "common/log.h"

const char *broker_rid_hex(const uint8_t *rid, size_t rid_len, char out[BROKER_RID_HEX])
{
    static const char digits[] = "0123456789abcdef";
    size_t n = rid_len > 16 ? 16 : rid_len;
    size_t j = 0;
    for (size_t i = 0; i < n; i++) {
        out[j++] = digits[rid[i] >> 4];
        out[j++] = digits[rid[i] & 15];
    }
    if (rid_len > n)
        out[j++] = '+';
    out[j] = '\0';
    return out;
}

static void s_drain(void *sock)
{
    int more = 1;
    size_t sz = sizeof more;
    while (zmq_getsockopt(sock, ZMQ_RCVMORE, &more, &sz) == 0 && more) {
        zmq_msg_t m;
        zmq_msg_init(&m);
        zmq_msg_recv(&m, sock, ZMQ_DONTWAIT);
        zmq_msg_close(&m);
    }
}

int broker_envelope_recv(void *sock, const char *role, uint8_t rid[BROKER_RID_MAX],
                         size_t *rid_len, zmq_msg_t *body)
{
    zmq_msg_t id;
    zmq_msg_init(&id);
    if (zmq_msg_recv(&id, sock, ZMQ_DONTWAIT) < 0) {
        zmq_msg_close(&id);
        return 0;
    }
    size_t n = zmq_msg_size(&id);
    *rid_len = n > BROKER_RID_MAX ? BROKER_RID_MAX : n;
    memcpy(rid, zmq_msg_data(&id), *rid_len);
    int more = zmq_msg_more(&id);
    zmq_msg_close(&id);
    char hex[BROKER_RID_HEX];
    if (!more) {
        LOG_WARN("dropped a message from %s %s: no body frame after the routing id", role,
                 broker_rid_hex(rid, *rid_len, hex));
        return -1;
    }
    zmq_msg_init(body);
    if (zmq_msg_recv(body, sock, ZMQ_DONTWAIT) < 0) {
        zmq_msg_close(body);
        LOG_WARN("dropped a message from %s %s: body frame lost (%s)", role,
                 broker_rid_hex(rid, *rid_len, hex), zmq_strerror(errno));
        return -1;
    }
    if (zmq_msg_more(body)) {
        s_drain(sock);
        zmq_msg_close(body);
        LOG_WARN("dropped a message from %s %s: more than one body frame", role,
                 broker_rid_hex(rid, *rid_len, hex));
        return -1;
    }
    return 1;
}

static void s_free_cb(void *data, void *hint)
{
    (void)hint;
    free(data);
}

static int s_send(void *sock, const uint8_t *rid, size_t rid_len, zmq_msg_t *body)
{
    if (zmq_send(sock, rid, rid_len, ZMQ_SNDMORE | ZMQ_DONTWAIT) < 0) {
        zmq_msg_close(body);
        return errno == EHOSTUNREACH ? 0 : -1;
    }
    if (zmq_msg_send(body, sock, ZMQ_DONTWAIT) < 0) {
        zmq_msg_close(body);
        return -1;
    }
    return 0;
}

int broker_envelope_send(void *sock, const uint8_t *rid, size_t rid_len, const proto_msg_t *msg)
{
    uint8_t *buf = NULL;
    size_t len = 0;
    int rc = proto_msg_encode(msg, &buf, &len);
    if (rc != PROTO_OK) {
        LOG_ERROR("could not encode %s (error %d); not sent", proto_type_name((int)msg->type), rc);
        free(buf);
        return -1;
    }
    zmq_msg_t body;
    if (zmq_msg_init_data(&body, buf, len, s_free_cb, NULL) != 0) {
        free(buf);
        return -1;
    }
    rc = s_send(sock, rid, rid_len, &body);
    if (rc < 0) {
        char hex[BROKER_RID_HEX];
        LOG_WARN("could not send %s to %s: %s", proto_type_name((int)msg->type),
                 broker_rid_hex(rid, rid_len, hex), zmq_strerror(errno));
    }
    return rc;
}

int broker_envelope_send_raw(void *sock, const uint8_t *rid, size_t rid_len, const void *body,
                             size_t len)
{
    zmq_msg_t m;
    if (zmq_msg_init_size(&m, len) != 0)
        return -1;
    memcpy(zmq_msg_data(&m), body, len);
    return s_send(sock, rid, rid_len, &m);
}
