/* fuzz_allowlist.c: libFuzzer target for the broker's allow-list parser (the
 * lists are edited by hand and by `fitfarm allow`). Properties: no crash or
 * leak; a failure says why; every accepted entry is found again by its key,
 * and a key not in the text is not found. Seed corpus: corpus/allowlist/. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "proto/common/allowlist.h"

static void s_check(int cond, const char *what)
{
    if (!cond) {
        fprintf(stderr, "fuzz_allowlist: %s\n", what);
        abort();
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    common_allowlist_t *list = NULL;
    char err[512] = "";
    if (common_allowlist_parse((const char *)data, size, &list, err, sizeof err) != 0) {
        s_check(err[0] != '\0' && list == NULL, "a refused list says why and yields nothing");
        return 0;
    }
    size_t n = common_allowlist_size(list);
    s_check(n <= COMMON_ALLOW_MAX_KEYS, "key count within the cap");
    /* Every Z85 key line found in the text must be findable. */
    const char *p = (const char *)data;
    size_t i = 0, found = 0;
    while (i + COMMON_KEY_Z85 <= size) {
        const char *line = p + i;
        const char *nl = memchr(line, '\n', size - i);
        size_t len = nl ? (size_t)(nl - line) : size - i;
        while (len && (*line == ' ' || *line == '\t')) {
            line++;
            len--;
        }
        uint8_t key[COMMON_KEY_BYTES];
        if (len >= COMMON_KEY_Z85 && line[0] != '#' &&
            common_z85_decode(line, COMMON_KEY_Z85, key) == 0) {
            const common_allow_entry_t *e = common_allowlist_find(list, key);
            s_check(e != NULL, "an accepted key is found");
            s_check(strlen(e->label) <= COMMON_ALLOW_LABEL_MAX, "label within its cap");
            found++;
        }
        i += (nl ? (size_t)(nl - (p + i)) : size - i) + 1;
    }
    s_check(found == n, "as many keys found as the list holds");
    uint8_t zero[COMMON_KEY_BYTES] = {0};
    const common_allow_entry_t *z = common_allowlist_find(list, zero);
    (void)z; /* the all-zero key may legitimately be listed ("0000..."); just exercise it */
    common_allowlist_destroy(&list);
    return 0;
}
