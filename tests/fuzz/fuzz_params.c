/* fuzz_params.c: libFuzzer target for proto_params_canonical (params come
 * from users and, through SUBMIT, from the network) and proto_format_double.
 * Properties: no crash or leak; a canonical text is within the limit and is
 * its own canonical form (idempotent); a failure always says why; any finite
 * double printed by proto_format_double reads back to the same bits.
 * Seed corpus: corpus/params/ (tests/fuzz/make_corpus.py). */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "proto/limits.h"
#include "proto/params.h"

static void s_check(int cond, const char *what)
{
    if (!cond) {
        fprintf(stderr, "fuzz_params: %s\n", what);
        abort();
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    char *text = malloc(size + 1);
    if (!text)
        return 0;
    memcpy(text, data, size);
    text[size] = '\0'; /* an embedded NUL just ends the text early */

    char *out = NULL, *again = NULL;
    char err[200];
    if (proto_params_canonical(text, &out, err, sizeof err) == 0) {
        s_check(out != NULL, "success without output");
        s_check(strlen(out) <= PROTO_MAX_PARAMS_BYTES, "canonical text past the limit");
        s_check(proto_params_canonical(out, &again, err, sizeof err) == 0,
                "canonical text is not valid params");
        s_check(strcmp(out, again) == 0, "canonical form is not idempotent");
    } else {
        s_check(out == NULL, "failure with output");
        s_check(err[0] != '\0', "failure without a message");
    }
    free(out);
    free(again);

    if (size >= 8) {
        double v;
        memcpy(&v, data, sizeof v);
        char buf[32];
        int n = proto_format_double(v, buf);
        s_check(n > 0 && n < 32 && (size_t)n == strlen(buf), "bad length");
        if (isfinite(v)) {
            double back = strtod(buf, NULL);
            s_check(memcmp(&back, &v, sizeof v) == 0, "double does not round-trip");
        } else {
            s_check(strcmp(buf, "null") == 0, "non-finite is not null");
        }
    }
    free(text);
    return 0;
}
