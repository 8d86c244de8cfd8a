/* msg_layout.h: facts about the wire layout that the encoder and the decoder
 * must agree on, kept in one place. Internal to proto/. */
#ifndef PROTO_MSG_LAYOUT_H
#define PROTO_MSG_LAYOUT_H

#include <stdint.h>

/* Number of fields after [version, type] for a message type; -1 for a type
 * we do not know. */
int proto_msg_field_count(uint32_t type);

#endif
