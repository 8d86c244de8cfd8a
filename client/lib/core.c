/* core.c: the core's shared state (core.h): the error sentence and the
 * outbox of encoded messages. Not here: what the messages say (run.c), the
 * socket that sends them (client.c). */
#include "core.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ring.h"

void client_core_init(client_core_t *self)
{
    memset(self, 0, sizeof *self);
    self->next_batch_tag = 1;
}

void client_core_fini(client_core_t *self)
{
    for (size_t i = 0; i < self->out_len; i++)
        free(self->outbox[(self->out_head + i) % self->out_cap].buf);
    free(self->outbox);
    self->outbox = NULL;
    self->out_len = self->out_cap = self->out_head = 0;
}

int client_core_fail(client_core_t *self, int code, const char *fmt, ...)
{
    if (self) {
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(self->err, sizeof self->err, fmt, ap);
        va_end(ap);
    }
    return code;
}

int client_core_emit(client_core_t *self, const proto_msg_t *msg)
{
    uint8_t *buf = NULL;
    size_t len = 0;
    int prc = proto_msg_encode(msg, &buf, &len);
    if (prc == PROTO_ENOMEM)
        return client_core_fail(self, FITFARM_ENOMEM, "out of memory encoding %s",
                                proto_type_name((int)msg->type));
    if (prc != PROTO_OK)
        return client_core_fail(self, FITFARM_EINVAL,
                                "cannot encode %s: a field is out of protocol",
                                proto_type_name((int)msg->type));
    void *ring = self->outbox;
    if (client_ring_reserve(&ring, &self->out_cap, &self->out_head, self->out_len,
                            sizeof *self->outbox, 64) != 0) {
        free(buf);
        return client_core_fail(self, FITFARM_ENOMEM, "out of memory queueing a message");
    }
    self->outbox = ring;
    self->outbox[(self->out_head + self->out_len) % self->out_cap] = (client_frame_t){buf, len};
    self->out_len++;
    return FITFARM_OK;
}

const client_frame_t *client_core_peek_frame(const client_core_t *self)
{
    return self->out_len ? &self->outbox[self->out_head] : NULL;
}

void client_core_drop_frame(client_core_t *self)
{
    if (self->out_len == 0)
        return;
    free(self->outbox[self->out_head].buf);
    self->out_head = (self->out_head + 1) % self->out_cap;
    self->out_len--;
}
