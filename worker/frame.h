/* frame.h: messages between the worker and its child processes over a
 * socketpair. Internal to the worker.
 *
 * A frame is a u32 little-endian length, then that many bytes: a u64
 * little-endian side value followed by one proto message (proto_msg_encode).
 * Parent -> child: JOBS with one job, side value 0. Child -> parent: DONE with
 * one outcome, side value the evaluation's wall time in microseconds as the
 * child measured it (with a queue of jobs in a child the parent cannot see when
 * an evaluation started). Reusing the wire encoding means the parent validates
 * a child's answer with the same strict decoder it uses on the network.
 *
 * Frames travel through byte buffers so that one read or one write moves many
 * of them: a turn's jobs for one child leave in one write, and a child's
 * finished answers in one. Not here: what the messages mean (pool.c, child.c).
 * Allocation failures are returned, never aborted on: the child runs under an
 * address-space limit and must report running out of memory. */
#ifndef WORKER_FRAME_H
#define WORKER_FRAME_H

#include <stddef.h>
#include <stdint.h>
#include <sys/types.h>

#include "msg.h"

/* Frames larger than this are refused (a job's genome plus its params fit). */
#define WORKER_FRAME_MAX (4u * 1024u * 1024u)
#define WORKER_FRAME_HEAD 12u /* length + side value */

/* Bytes [pos, len) of data are pending (unread input, or unwritten output). */
typedef struct {
    uint8_t *data;
    size_t pos, len, cap;
} worker_frame_buf_t;

void worker_frame_buf_free(worker_frame_buf_t *b);

static inline size_t worker_frame_buf_pending(const worker_frame_buf_t *b)
{
    return b->len - b->pos;
}

/* Encodes msg into a new frame (*frame malloc'd, *frame_len bytes). Returns 0,
 * or -1 if encoding failed, the frame is too large or memory ran out. */
int worker_frame_encode(const proto_msg_t *msg, uint64_t side, uint8_t **frame, size_t *frame_len);

/* Appends bytes to b. Returns 0, or -1 out of memory. */
int worker_frame_buf_append(worker_frame_buf_t *b, const uint8_t *bytes, size_t len);

/* One read(2) into b (at most 256 KiB). flags as recv(2) (MSG_DONTWAIT).
 * Returns bytes read, 0 at end of file, or -1 with errno (EAGAIN: nothing now). */
ssize_t worker_frame_fill(worker_frame_buf_t *b, int fd, int flags);

/* Takes the next complete frame out of b. Returns 1 with *out a new message
 * (caller destroys it) and *side, 0 if b holds no complete frame yet, or -1
 * with a sentence in err (errlen bytes) for an oversized frame or a message
 * the decoder refuses. */
int worker_frame_next(worker_frame_buf_t *b, proto_msg_t **out, uint64_t *side, char *err,
                      size_t errlen);

/* Writes b's pending bytes to fd (no SIGPIPE). block: until all are written;
 * else as much as the socket takes now. Returns 0 when nothing is pending
 * any more, 1 if bytes remain (non-blocking only), -1 if the peer is gone. */
int worker_frame_flush(worker_frame_buf_t *b, int fd, int block);

#endif
