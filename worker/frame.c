/* frame.c: length-prefixed proto messages over a stream socket (frame.h).
 * Owns only the byte framing; blocking reads and writes retry on EINTR. */
#include "frame.h"

#include <errno.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <unistd.h>

static int s_write_all(int fd, const uint8_t *buf, size_t len)
{
    while (len > 0) {
        /* MSG_NOSIGNAL: a dead child must become an error here, not a SIGPIPE. */
        ssize_t w = send(fd, buf, len, MSG_NOSIGNAL);
        if (w < 0 && errno == EINTR)
            continue;
        if (w <= 0)
            return -1;
        buf += w;
        len -= (size_t)w;
    }
    return 0;
}

/* Returns bytes read (== len), or fewer at end of file, or -1 on error. */
static ssize_t s_read_all(int fd, uint8_t *buf, size_t len)
{
    size_t got = 0;
    while (got < len) {
        ssize_t r = read(fd, buf + got, len - got);
        if (r < 0 && errno == EINTR)
            continue;
        if (r < 0)
            return -1;
        if (r == 0)
            break;
        got += (size_t)r;
    }
    return (ssize_t)got;
}

int worker_frame_write(int fd, const proto_msg_t *msg)
{
    uint8_t *body = NULL;
    size_t len = 0;
    int rc = -1;
    if (proto_msg_encode(msg, &body, &len) != PROTO_OK || len > WORKER_FRAME_MAX)
        goto cleanup;
    uint8_t head[4] = {(uint8_t)len, (uint8_t)(len >> 8), (uint8_t)(len >> 16),
                       (uint8_t)(len >> 24)};
    if (s_write_all(fd, head, sizeof head) != 0 || s_write_all(fd, body, len) != 0)
        goto cleanup;
    rc = 0;
cleanup:
    free(body);
    return rc;
}

int worker_frame_read(int fd, proto_msg_t **out, char *err, size_t errlen)
{
    uint8_t head[4];
    uint8_t *body = NULL;
    int rc = -1;
    *out = NULL;
    ssize_t r = s_read_all(fd, head, sizeof head);
    if (r == 0) {
        rc = 1;
        goto cleanup;
    }
    if (r != (ssize_t)sizeof head) {
        snprintf(err, errlen, "frame header cut short");
        goto cleanup;
    }
    uint32_t len = (uint32_t)head[0] | (uint32_t)head[1] << 8 | (uint32_t)head[2] << 16 |
                   (uint32_t)head[3] << 24;
    if (len == 0 || len > WORKER_FRAME_MAX) {
        snprintf(err, errlen, "frame of %u bytes (limit %u)", len, WORKER_FRAME_MAX);
        goto cleanup;
    }
    body = malloc(len);
    if (!body) {
        snprintf(err, errlen, "out of memory for a %u-byte frame", len);
        goto cleanup;
    }
    if (s_read_all(fd, body, len) != (ssize_t)len) {
        snprintf(err, errlen, "frame body cut short");
        goto cleanup;
    }
    proto_err_t perr = {0};
    if (proto_msg_decode(body, len, NULL, out, &perr) != PROTO_OK) {
        snprintf(err, errlen, "undecodable frame: %s", perr.text);
        goto cleanup;
    }
    rc = 0;
cleanup:
    free(body);
    return rc;
}
