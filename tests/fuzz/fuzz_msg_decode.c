/* fuzz_msg_decode.c: libFuzzer target for proto_msg_decode, the first code
 * that touches bytes from the network. Any input must decode or be refused
 * without a crash, leak or out-of-bounds read (ASan/UBSan). Whatever decodes
 * must encode again, and that encoding must decode to a message whose
 * encoding is the same bytes (decode and encode agree on every field).
 * Also decodes under tight limits, to reach the limit paths.
 * Seed corpus: corpus/msg_decode/ (tests/fuzz/make_corpus.py). */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "proto/msg.h"

static void s_check(int cond, const char *what)
{
    if (!cond) {
        fprintf(stderr, "fuzz_msg_decode: %s\n", what);
        abort();
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    proto_msg_t *m = NULL, *m2 = NULL;
    proto_err_t err;
    uint8_t *e1 = NULL, *e2 = NULL;
    size_t n1 = 0, n2 = 0;

    int rc = proto_msg_decode(data, size, NULL, &m, &err);
    if (rc != PROTO_OK) {
        s_check(m == NULL, "failed decode returned a message");
        s_check(err.code == rc && err.text[0] != '\0', "failed decode without error text");
        s_check(memchr(err.text, '\0', sizeof err.text) != NULL, "error text not terminated");
    } else {
        s_check(proto_msg_encode(m, &e1, &n1) == PROTO_OK, "decoded message does not encode");
        s_check(proto_msg_decode(e1, n1, NULL, &m2, &err) == PROTO_OK, "re-encoding does not decode");
        s_check(m2->type == m->type, "type changed");
        s_check(proto_msg_encode(m2, &e2, &n2) == PROTO_OK, "second decode does not encode");
        s_check(n1 == n2 && memcmp(e1, e2, n1) == 0, "re-encodings differ");
        /* our encoder writes the smallest forms, so it never grows a message */
        s_check(n1 <= size, "re-encoding longer than the input");
    }

    proto_limits_t tight = {.message_bytes = 4096, .genome_bytes = 16, .batch_items = 3,
                            .objectives = 2, .name_bytes = 8, .params_bytes = 16,
                            .error_bytes = 8};
    proto_msg_t *m3 = NULL;
    rc = proto_msg_decode(data, size, &tight, &m3, &err);
    s_check((rc == PROTO_OK) == (m3 != NULL), "result and message disagree");

    proto_msg_destroy(&m);
    proto_msg_destroy(&m2);
    proto_msg_destroy(&m3);
    free(e1);
    free(e2);
    return 0;
}
