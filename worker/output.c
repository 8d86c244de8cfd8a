/* output.c: bounded capture and logging of a child's output (output.h). */
#include "output.h"

#include <errno.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "common/log.h"

int worker_output_read(worker_output_t *o, int fd)
{
    char sink[16384];
    for (;;) {
        size_t room = sizeof o->buf - o->len;
        char *to = room ? o->buf + o->len : sink;
        size_t want = room ? room : sizeof sink;
        ssize_t r = read(fd, to, want);
        if (r < 0 && errno == EINTR)
            continue;
        if (r < 0)
            return errno == EAGAIN || errno == EWOULDBLOCK ? 0 : 1;
        if (r == 0)
            return 1;
        if (room)
            o->len += (size_t)r;
        else
            o->cut += (uint64_t)r;
    }
}

/* Writes line (n bytes) into out with control characters as \n, \t, \xHH,
 * at most WORKER_OUTPUT_MAX_LINE source bytes. Returns the bytes it left out. */
static size_t s_escape(const char *line, size_t n, char *out, size_t cap)
{
    size_t o = 0, i = 0;
    for (; i < n && i < WORKER_OUTPUT_MAX_LINE && o + 5 < cap; i++) {
        unsigned char ch = (unsigned char)line[i];
        if (ch == '\t') {
            out[o++] = '\\';
            out[o++] = 't';
        } else if (ch < 0x20 || ch == 0x7f) {
            o += (size_t)snprintf(out + o, cap - o, "\\x%02x", ch);
        } else {
            out[o++] = (char)ch;
        }
    }
    out[o] = '\0';
    return n - i;
}

void worker_output_flush(worker_output_t *o)
{
    char who[64];
    if (o->job_id)
        snprintf(who, sizeof who, "job %llu", (unsigned long long)o->job_id);
    else
        snprintf(who, sizeof who, "child %d between jobs", o->child);
    size_t at = 0;
    while (at < o->len) {
        const char *nl = memchr(o->buf + at, '\n', o->len - at);
        size_t n = nl ? (size_t)(nl - (o->buf + at)) : o->len - at;
        char text[WORKER_OUTPUT_MAX_LINE * 4 + 8];
        size_t left = s_escape(o->buf + at, n, text, sizeof text);
        if (left)
            LOG_INFO("%s printed: %s [... %zu bytes of this line cut]", who, text, left);
        else
            LOG_INFO("%s printed: %s", who, text);
        at += n + (nl ? 1 : 0);
    }
    if (o->cut)
        LOG_WARN("%s printed more than %u bytes: [... %llu bytes cut]", who,
                 WORKER_OUTPUT_MAX_BYTES, (unsigned long long)o->cut);
    o->len = 0;
    o->cut = 0;
}

int worker_output_read_for(worker_output_t *o, int fd, uint64_t owner)
{
    if ((o->len || o->cut) && owner && o->job_id != owner)
        worker_output_flush(o);
    if (!o->len && !o->cut)
        o->job_id = owner;
    return worker_output_read(o, fd);
}

void worker_output_end(worker_output_t *o)
{
    if (o->len || o->cut)
        worker_output_flush(o);
    o->job_id = 0;
}
