/* fuzz_jsonl.c: libFuzzer target for the `fitfarm eval` line parser
 * (client/cli/jsonl.c). Any bytes must give a row, a blank, or an error
 * sentence; never a crash, a leak or a read past the input. Invariants that
 * hold for every input are checked too. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "client/cli/jsonl.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    /* A copy of exactly size bytes, so ASan sees any read past the end. */
    char *line = malloc(size ? size : 1);
    if (!line)
        return 0;
    memcpy(line, data, size);
    cli_jsonl_row_t row;
    char err[256];
    int rc = cli_jsonl_parse(line, size, &row, err, sizeof err);
    if (rc == CLI_JSONL_ROW) {
        if (row.n == 0 || row.n > CLI_JSONL_MAX_VALUES || !row.id_json)
            abort();
        for (size_t i = 0; i < row.n; i++)
            if (!isfinite(row.genome[i]))
                abort();
    } else if (rc == CLI_JSONL_INVALID) {
        if (err[0] == '\0' || !row.id_json || row.genome)
            abort();
    }
    cli_jsonl_row_free(&row);
    free(line);
    return 0;
}
