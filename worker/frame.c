/* frame.c: length-prefixed proto messages in byte buffers over a stream
 * socket (frame.h). Owns only the byte framing and the buffered reads and
 * writes; calls retry on EINTR. */
#include "frame.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <unistd.h>

#define S_READ_CHUNK (256u * 1024u)

static void s_put_u32(uint8_t *p, uint32_t v)
{
    for (int i = 0; i < 4; i++)
        p[i] = (uint8_t)(v >> (8 * i));
}

static void s_put_u64(uint8_t *p, uint64_t v)
{
    for (int i = 0; i < 8; i++)
        p[i] = (uint8_t)(v >> (8 * i));
}

static uint64_t s_get_le(const uint8_t *p, int n)
{
    uint64_t v = 0;
    for (int i = n - 1; i >= 0; i--)
        v = v << 8 | p[i];
    return v;
}

void worker_frame_buf_free(worker_frame_buf_t *b)
{
    free(b->data);
    memset(b, 0, sizeof *b);
}

/* Room for need more bytes after len; consumed bytes are dropped first. */
static int s_reserve(worker_frame_buf_t *b, size_t need)
{
    if (b->pos > 0 && (b->pos == b->len || b->cap - b->len < need)) {
        memmove(b->data, b->data + b->pos, b->len - b->pos);
        b->len -= b->pos;
        b->pos = 0;
    }
    if (b->cap - b->len >= need)
        return 0;
    size_t cap = b->cap ? b->cap : 64u * 1024u;
    while (cap - b->len < need)
        cap *= 2;
    uint8_t *data = realloc(b->data, cap);
    if (!data)
        return -1;
    b->data = data;
    b->cap = cap;
    return 0;
}

int worker_frame_encode(const proto_msg_t *msg, uint64_t side, uint8_t **frame, size_t *frame_len)
{
    uint8_t *body = NULL;
    size_t len = 0;
    *frame = NULL;
    if (proto_msg_encode(msg, &body, &len) != PROTO_OK)
        return -1;
    int rc = -1;
    if (len + 8u > WORKER_FRAME_MAX)
        goto cleanup;
    uint8_t *f = malloc(WORKER_FRAME_HEAD + len);
    if (!f)
        goto cleanup;
    s_put_u32(f, (uint32_t)(len + 8u));
    s_put_u64(f + 4, side);
    memcpy(f + WORKER_FRAME_HEAD, body, len);
    *frame = f;
    *frame_len = WORKER_FRAME_HEAD + len;
    rc = 0;
cleanup:
    free(body);
    return rc;
}

int worker_frame_buf_append(worker_frame_buf_t *b, const uint8_t *bytes, size_t len)
{
    if (s_reserve(b, len) != 0)
        return -1;
    memcpy(b->data + b->len, bytes, len);
    b->len += len;
    return 0;
}

ssize_t worker_frame_fill(worker_frame_buf_t *b, int fd, int flags)
{
    if (s_reserve(b, S_READ_CHUNK) != 0) {
        errno = ENOMEM;
        return -1;
    }
    for (;;) {
        ssize_t r = recv(fd, b->data + b->len, b->cap - b->len, flags);
        if (r < 0 && errno == EINTR)
            continue;
        if (r > 0)
            b->len += (size_t)r;
        return r;
    }
}

int worker_frame_next(worker_frame_buf_t *b, proto_msg_t **out, uint64_t *side, char *err,
                      size_t errlen)
{
    *out = NULL;
    size_t have = b->len - b->pos;
    if (have < 4)
        return 0;
    const uint8_t *p = b->data + b->pos;
    uint32_t len = (uint32_t)s_get_le(p, 4);
    if (len < 9 || len > WORKER_FRAME_MAX) {
        snprintf(err, errlen, "frame of %u bytes (limit %u)", len, WORKER_FRAME_MAX);
        return -1;
    }
    if (have < 4u + len)
        return 0;
    *side = s_get_le(p + 4, 8);
    proto_err_t perr = {0};
    if (proto_msg_decode(p + WORKER_FRAME_HEAD, len - 8u, NULL, out, &perr) != PROTO_OK) {
        snprintf(err, errlen, "undecodable frame: %s", perr.text);
        return -1;
    }
    b->pos += 4u + len;
    if (b->pos == b->len)
        b->pos = b->len = 0;
    return 1;
}

int worker_frame_flush(worker_frame_buf_t *b, int fd, int block)
{
    while (b->pos < b->len) {
        /* MSG_NOSIGNAL: a dead peer must become an error here, not a SIGPIPE. */
        ssize_t w =
            send(fd, b->data + b->pos, b->len - b->pos, MSG_NOSIGNAL | (block ? 0 : MSG_DONTWAIT));
        if (w < 0 && errno == EINTR)
            continue;
        if (w < 0 && !block && (errno == EAGAIN || errno == EWOULDBLOCK))
            return 1;
        if (w <= 0)
            return -1;
        b->pos += (size_t)w;
    }
    b->pos = b->len = 0;
    return 0;
}
