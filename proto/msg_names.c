/* msg_names.c: printable names of message types and job statuses, for logs
 * and error texts. Not here: encoding or decoding of anything. */
#include "msg.h"

const char *proto_type_name(int type)
{
    switch (type) {
    case PROTO_SUBMIT: return "SUBMIT";
    case PROTO_ACK: return "ACK";
    case PROTO_STATUS_REQ: return "STATUS_REQ";
    case PROTO_ACCEPTED: return "ACCEPTED";
    case PROTO_RESULTS: return "RESULTS";
    case PROTO_REFUSED: return "REFUSED";
    case PROTO_STATUS: return "STATUS";
    case PROTO_HELLO: return "HELLO";
    case PROTO_CREDIT: return "CREDIT";
    case PROTO_DONE: return "DONE";
    case PROTO_BYE: return "BYE";
    case PROTO_JOBS: return "JOBS";
    case PROTO_REHELLO: return "REHELLO";
    case PROTO_HEARTBEAT: return "HEARTBEAT";
    default: return "?";
    }
}

const char *proto_status_name(int status)
{
    switch (status) {
    case PROTO_STATUS_OK: return "ok";
    case PROTO_STATUS_INVALID: return "invalid";
    case PROTO_STATUS_FAILED: return "failed";
    case PROTO_STATUS_CRASHED: return "crashed";
    case PROTO_STATUS_TIMEOUT: return "timeout";
    default: return "unknown";
    }
}
