/* fuzz_config.c: libFuzzer target for the configuration file parser.
 * Properties: no crash or leak; a failure says why; an accepted file's values
 * are non-empty, within the cap and free of control characters other than
 * tab. Seed corpus: corpus/config/. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "proto/common/config.h"

static void s_check(int cond, const char *what)
{
    if (!cond) {
        fprintf(stderr, "fuzz_config: %s\n", what);
        abort();
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    common_config_t *cfg = NULL;
    char err[512] = "";
    if (common_config_parse((const char *)data, size, &cfg, err, sizeof err) != 0) {
        s_check(err[0] != '\0' && cfg == NULL, "a refused config says why and yields nothing");
        return 0;
    }
    static const char *const names[] = {"broker", "key", "broker_key", "keys_dir"};
    for (size_t i = 0; i < 4; i++) {
        const char *v = common_config_get(cfg, names[i]);
        if (!v)
            continue;
        size_t n = strlen(v);
        s_check(n > 0 && n <= COMMON_CONFIG_VALUE_MAX, "value length");
        for (size_t k = 0; k < n; k++)
            s_check((unsigned char)v[k] >= 0x20 || v[k] == '\t', "no control characters");
        s_check(v[0] != ' ' && v[n - 1] != ' ', "values are trimmed");
    }
    s_check(common_config_get(cfg, "nonsense") == NULL, "unknown names are not stored");
    common_config_destroy(&cfg);
    return 0;
}
