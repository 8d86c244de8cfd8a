/* jsonl.h: one input line of `fitfarm eval` (JSON Lines) to a genome. Pure:
 * bytes in, doubles and an id out, or a sentence saying what was wrong. No I/O,
 * so the fuzzer can drive it (tests/fuzz/fuzz_jsonl.c).
 *
 * Accepted shapes (RFC 8259 JSON, UTF-8):
 *   {"id": <scalar>, "genome": [numbers]}   id optional: string, number, bool, null
 *   [numbers]                               a bare genome, id null
 * A line of only whitespace is blank (skipped; no output). Rejected: anything
 * else, other keys, NaN/Infinity (not JSON), numbers out of double range, an
 * empty genome, more than CLI_JSONL_MAX_VALUES numbers, lines longer than
 * CLI_JSONL_MAX_LINE bytes. */
#ifndef CLIENT_CLI_JSONL_H
#define CLIENT_CLI_JSONL_H

#include <stddef.h>

#include "limits.h"

#define CLI_JSONL_MAX_VALUES (PROTO_MAX_GENOME_BYTES / 8u)
#define CLI_JSONL_MAX_LINE (16u * 1024u * 1024u)

typedef struct {
    double *genome; /* malloc'd, n values; NULL when n is 0 */
    size_t n;
    char *id_json;  /* malloc'd compact JSON text of the id; "null" when absent */
} cli_jsonl_row_t;

enum {
    CLI_JSONL_ROW = 1,     /* row filled */
    CLI_JSONL_BLANK = 0,   /* only whitespace: skip */
    CLI_JSONL_INVALID = -1,/* err holds the reason; row->id_json is set (maybe "null") */
    CLI_JSONL_NOMEM = -2,
};

/* Parses line[0..len) (a trailing "\n" or "\r\n" is allowed). On ROW and
 * INVALID the caller frees the row with cli_jsonl_row_free. err gets
 * errlen bytes, NUL-terminated. */
int cli_jsonl_parse(const char *line, size_t len, cli_jsonl_row_t *row, char *err, size_t errlen);

void cli_jsonl_row_free(cli_jsonl_row_t *row);

#endif
