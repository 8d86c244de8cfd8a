/* frame.h: messages between the worker and its child processes over a
 * socketpair. Internal to the worker.
 *
 * A frame is a u32 little-endian length followed by that many bytes of one
 * proto message (proto_msg_encode): JOBS with one job parent -> child, DONE
 * with one outcome child -> parent. Reusing the wire encoding means the
 * parent validates a child's answer with the same strict decoder it uses on
 * the network. Not here: what the messages mean (pool.c, child.c). */
#ifndef WORKER_FRAME_H
#define WORKER_FRAME_H

#include <stddef.h>

#include "msg.h"

/* Frames larger than this are refused (a job's genome plus its params fit). */
#define WORKER_FRAME_MAX (4u * 1024u * 1024u)

/* Encodes msg and writes one frame to fd, blocking until it is all written.
 * Returns 0, or -1 if encoding failed or the peer is gone (no SIGPIPE). */
int worker_frame_write(int fd, const proto_msg_t *msg);

/* Reads one frame from fd, blocking, and decodes it. Returns 0 with *out a
 * new message (caller destroys it), 1 on a clean end of file before any byte,
 * or -1 with a sentence in err (errlen bytes) on a short read, an oversized
 * frame or a message the decoder refuses. */
int worker_frame_read(int fd, proto_msg_t **out, char *err, size_t errlen);

#endif
