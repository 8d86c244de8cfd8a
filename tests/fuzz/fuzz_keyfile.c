/* fuzz_keyfile.c: libFuzzer target for the key file parsers (a key file is
 * user input, and a public key file travels between machines). Properties: no
 * crash or leak; a failure always says why; an accepted public key re-encodes
 * (Z85) and parses back to the same bytes; an accepted secret file yields the
 * public key its "public:" line stated, if any.
 * Seed corpus: corpus/keyfile/. */
#include <sodium.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "proto/common/keyfile.h"

static void s_check(int cond, const char *what)
{
    if (!cond) {
        fprintf(stderr, "fuzz_keyfile: %s\n", what);
        abort();
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static int init;
    if (!init) {
        s_check(sodium_init() >= 0, "sodium_init");
        init = 1;
    }
    const char *text = (const char *)data;
    uint8_t key[COMMON_KEY_BYTES];
    char err[512] = "";
    if (common_keyfile_parse_public(text, size, key, err, sizeof err) == 0) {
        char z[COMMON_KEY_Z85 + 1], again[64];
        uint8_t back[COMMON_KEY_BYTES];
        common_z85_encode_key(key, z);
        snprintf(again, sizeof again, "%s\n", z);
        s_check(common_keyfile_parse_public(again, strlen(again), back, err, sizeof err) == 0,
                "a re-encoded public key parses");
        s_check(memcmp(back, key, sizeof key) == 0, "Z85 round trip");
    } else {
        s_check(err[0] != '\0', "a refused public key file says why");
    }
    common_keypair_t *pair = sodium_malloc(sizeof *pair);
    if (!pair)
        return 0;
    err[0] = '\0';
    if (common_keyfile_parse_secret(text, size, pair, err, sizeof err) != 0)
        s_check(err[0] != '\0', "a refused secret key file says why");
    sodium_free(pair);
    return 0;
}
