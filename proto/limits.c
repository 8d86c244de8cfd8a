/* limits.c: the default decoder limits, and how a caller's limits are made
 * safe before use. The ceilings themselves are constants in limits.h; this
 * file only hands them out. Not here: the checks, which live where each size
 * is read (msg_decode.c). */
#include "limits.h"

proto_limits_t proto_limits_default(void)
{
    proto_limits_t lim = {
        .message_bytes = PROTO_MAX_MESSAGE_BYTES,
        .genome_bytes = PROTO_MAX_GENOME_BYTES,
        .batch_items = PROTO_MAX_BATCH_ITEMS,
        .objectives = PROTO_MAX_OBJECTIVES,
        .name_bytes = PROTO_MAX_NAME_BYTES,
        .params_bytes = PROTO_MAX_PARAMS_BYTES,
        .error_bytes = PROTO_MAX_ERROR_BYTES,
    };
    return lim;
}
