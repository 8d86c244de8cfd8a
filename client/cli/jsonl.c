/* jsonl.c: the pure parser of one `fitfarm eval` input line (see jsonl.h).
 * Owns the accepted shapes and the wording of every rejection; not the
 * reading of lines (cmd_eval.c) nor output. */
#include "jsonl.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char *s_type_name(const json_t *v)
{
    switch (json_typeof(v)) {
    case JSON_OBJECT: return "an object";
    case JSON_ARRAY: return "an array";
    case JSON_STRING: return "a string";
    case JSON_INTEGER: return "an integer";
    case JSON_REAL: return "a number";
    case JSON_TRUE: return "true";
    case JSON_FALSE: return "false";
    case JSON_NULL: return "null";
    default: return "something else";
    }
}

static int s_is_blank(const char *s, size_t len)
{
    for (size_t i = 0; i < len; i++)
        if (s[i] != ' ' && s[i] != '\t' && s[i] != '\r' && s[i] != '\n')
            return 0;
    return 1;
}

/* Does the text spell a non-finite number the way other tools print one? */
static int s_mentions_nonfinite(const char *s, size_t len)
{
    static const char *const words[] = {"NaN", "nan", "Infinity", "infinity", "inf", "Inf"};
    for (size_t w = 0; w < sizeof words / sizeof words[0]; w++) {
        size_t wl = strlen(words[w]);
        for (size_t i = 0; i + wl <= len; i++)
            if (memcmp(s + i, words[w], wl) == 0)
                return 1;
    }
    return 0;
}

/* The shortest text of a real that parses back to the same double: ids are
 * echoed as the user wrote them, 0.1 and not 0.10000000000000001. */
static char *s_real_text(double v)
{
    char buf[40];
    for (int prec = 1; prec <= 17; prec++) {
        snprintf(buf, sizeof buf, "%.*g", prec, v);
        if (strtod(buf, NULL) == v)
            break;
    }
    /* Keep it a JSON real: "1e+20" and "0.5" are fine, "3" is not a real but
     * is still a valid JSON number, so it can stay. */
    return strdup(buf);
}

static char *s_id_text(const json_t *id)
{
    if (json_is_real(id))
        return s_real_text(json_real_value(id));
    return json_dumps(id, JSON_ENCODE_ANY | JSON_COMPACT);
}

static int s_genome(const json_t *arr, cli_jsonl_row_t *row, char *err, size_t errlen)
{
    size_t n = json_array_size(arr);
    if (n == 0) {
        snprintf(err, errlen, "the genome is empty");
        return CLI_JSONL_INVALID;
    }
    if (n > CLI_JSONL_MAX_VALUES) {
        snprintf(err, errlen, "the genome has %zu values; the limit is %u (%u bytes)", n,
                 CLI_JSONL_MAX_VALUES, PROTO_MAX_GENOME_BYTES);
        return CLI_JSONL_INVALID;
    }
    for (size_t i = 0; i < n; i++) {
        const json_t *v = json_array_get(arr, i);
        if (!json_is_number(v)) {
            snprintf(err, errlen, "genome[%zu] is %s, not a number", i, s_type_name(v));
            return CLI_JSONL_INVALID;
        }
        if (!isfinite(json_number_value(v))) {
            snprintf(err, errlen, "genome[%zu] is not a finite number", i);
            return CLI_JSONL_INVALID;
        }
    }
    row->genome = malloc(n * sizeof *row->genome);
    if (!row->genome)
        return CLI_JSONL_NOMEM;
    for (size_t i = 0; i < n; i++)
        row->genome[i] = json_number_value(json_array_get(arr, i));
    row->n = n;
    return CLI_JSONL_ROW;
}

static int s_object(const json_t *obj, cli_jsonl_row_t *row, char *err, size_t errlen)
{
    const json_t *id = json_object_get(obj, "id");
    if (id) {
        if (json_is_object(id) || json_is_array(id)) {
            snprintf(err, errlen, "\"id\" must be a string, number, boolean or null, not %s",
                     s_type_name(id));
            return CLI_JSONL_INVALID;
        }
        char *text = s_id_text(id);
        if (!text)
            return CLI_JSONL_NOMEM;
        free(row->id_json);
        row->id_json = text;
    }
    const char *key;
    const json_t *value;
    json_object_foreach((json_t *)obj, key, value)
    {
        if (strcmp(key, "id") != 0 && strcmp(key, "genome") != 0) {
            snprintf(err, errlen, "unknown key \"%.64s\" (allowed: \"id\", \"genome\")", key);
            return CLI_JSONL_INVALID;
        }
    }
    const json_t *genome = json_object_get(obj, "genome");
    if (!genome) {
        snprintf(err, errlen, "missing \"genome\" (an array of numbers)");
        return CLI_JSONL_INVALID;
    }
    if (!json_is_array(genome)) {
        snprintf(err, errlen, "\"genome\" must be an array of numbers, not %s",
                 s_type_name(genome));
        return CLI_JSONL_INVALID;
    }
    return s_genome(genome, row, err, errlen);
}

int cli_jsonl_parse(const char *line, size_t len, cli_jsonl_row_t *row, char *err, size_t errlen)
{
    memset(row, 0, sizeof *row);
    if (errlen)
        err[0] = '\0';
    if (len > 0 && line[len - 1] == '\n')
        len--;
    if (len > 0 && line[len - 1] == '\r')
        len--;
    if (s_is_blank(line, len))
        return CLI_JSONL_BLANK;
    row->id_json = strdup("null");
    if (!row->id_json)
        return CLI_JSONL_NOMEM;
    if (len > CLI_JSONL_MAX_LINE) {
        snprintf(err, errlen, "the line has %zu bytes; the limit is %u", len, CLI_JSONL_MAX_LINE);
        return CLI_JSONL_INVALID;
    }
    json_error_t jerr;
    json_t *root = json_loadb(line, len, JSON_DECODE_ANY | JSON_REJECT_DUPLICATES, &jerr);
    int rc;
    if (!root) {
        snprintf(err, errlen, "not JSON: %s at column %d%s", jerr.text, jerr.column,
                 s_mentions_nonfinite(line, len) ? " (NaN and Infinity are not JSON numbers)"
                                                  : "");
        rc = CLI_JSONL_INVALID;
    } else if (json_is_object(root)) {
        rc = s_object(root, row, err, errlen);
    } else if (json_is_array(root)) {
        rc = s_genome(root, row, err, errlen);
    } else {
        snprintf(err, errlen,
                 "expected an object {\"id\": ..., \"genome\": [numbers]} or an array of "
                 "numbers, not %s",
                 s_type_name(root));
        rc = CLI_JSONL_INVALID;
    }
    json_decref(root);
    if (rc == CLI_JSONL_NOMEM)
        cli_jsonl_row_free(row);
    return rc;
}

void cli_jsonl_row_free(cli_jsonl_row_t *row)
{
    if (!row)
        return;
    free(row->genome);
    free(row->id_json);
    memset(row, 0, sizeof *row);
}
