/* msg_names.c: printable names of message types and job statuses, for logs
 * and error texts, and the field count of each type, which the encoder and
 * the decoder share. Not here: encoding or decoding of anything. */
#include "msg.h"
#include "msg_layout.h"

int proto_msg_field_count(uint32_t type)
{
    switch (type) {
    case PROTO_SUBMIT: return 11;
    case PROTO_ACK: return 2;
    case PROTO_ACCEPTED: return 3;
    case PROTO_RESULTS: return 2;
    case PROTO_REFUSED: return 6;
    case PROTO_STATUS: return 3;
    case PROTO_HELLO: return 6;
    case PROTO_CREDIT: return 1;
    case PROTO_DONE: return 2;
    case PROTO_HAND_BACK: return 3;
    case PROTO_CANCEL: return 1;
    case PROTO_JOBS: return 1;
    case PROTO_STATUS_REQ:
    case PROTO_BYE:
    case PROTO_REHELLO:
    case PROTO_HEARTBEAT: return 0;
    default: return -1;
    }
}

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
    case PROTO_HAND_BACK: return "HAND_BACK";
    case PROTO_JOBS: return "JOBS";
    case PROTO_REHELLO: return "REHELLO";
    case PROTO_CANCEL: return "CANCEL";
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
