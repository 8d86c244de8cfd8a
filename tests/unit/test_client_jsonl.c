/* test_client_jsonl.c: the `fitfarm eval` input line parser (client/cli/jsonl.c):
 * every accepted shape with the values it yields, and every rejected shape
 * with the words of its error. JSON itself is RFC 8259; the 17-digit numbers
 * below round-trip by IEEE 754-2008 (binary64 needs at most 17 significant
 * digits), so exact equality is the right check. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "client/cli/jsonl.h"

static int s_parse(const char *text, cli_jsonl_row_t *row, char *err, size_t errlen)
{
    return cli_jsonl_parse(text, strlen(text), row, err, errlen);
}

/* Usage: one line in, a genome and the id's JSON text out. */
static void test_usage_example(void **state)
{
    (void)state;
    const char *line = "{\"id\": \"g-1\", \"genome\": [0.5, 1, -2.25e3]}\n";
    cli_jsonl_row_t row;
    char err[256];
    assert_int_equal(cli_jsonl_parse(line, strlen(line), &row, err, sizeof err), CLI_JSONL_ROW);
    assert_int_equal(row.n, 3);
    assert_true(row.genome[0] == 0.5 && row.genome[1] == 1.0 && row.genome[2] == -2250.0);
    assert_string_equal(row.id_json, "\"g-1\"");
    cli_jsonl_row_free(&row);
}

static void test_accepted_shapes(void **state)
{
    (void)state;
    cli_jsonl_row_t row;
    char err[256];
    /* A bare array: id null. */
    assert_int_equal(s_parse("[1,2,3]", &row, err, sizeof err), CLI_JSONL_ROW);
    assert_int_equal(row.n, 3);
    assert_string_equal(row.id_json, "null");
    cli_jsonl_row_free(&row);
    /* An object without id. */
    assert_int_equal(s_parse("{\"genome\":[0.25]}", &row, err, sizeof err), CLI_JSONL_ROW);
    assert_string_equal(row.id_json, "null");
    cli_jsonl_row_free(&row);
    /* Every scalar id kind, echoed as compact JSON; key order does not matter. */
    static const struct {
        const char *line, *id;
    } ids[] = {
        {"{\"genome\":[1],\"id\":7}", "7"},
        {"{\"id\":-3,\"genome\":[1]}", "-3"},
        {"{\"id\":0.1,\"genome\":[1]}", "0.1"}, /* shortest round-trip text */
        {"{\"id\":1e300,\"genome\":[1]}", "1e+300"},
        {"{\"id\":true,\"genome\":[1]}", "true"},
        {"{\"id\":false,\"genome\":[1]}", "false"},
        {"{\"id\":null,\"genome\":[1]}", "null"},
        {"{\"id\":\"a\\\"b\",\"genome\":[1]}", "\"a\\\"b\""},
        {"{\"id\":\"\xc3\xa9t\xc3\xa9\",\"genome\":[1]}", "\"\xc3\xa9t\xc3\xa9\""},
    };
    for (size_t i = 0; i < sizeof ids / sizeof ids[0]; i++) {
        assert_int_equal(s_parse(ids[i].line, &row, err, sizeof err), CLI_JSONL_ROW);
        assert_string_equal(row.id_json, ids[i].id);
        cli_jsonl_row_free(&row);
    }
    /* CRLF endings and surrounding whitespace are fine. */
    assert_int_equal(s_parse("  [ 1 , 2 ]  \r\n", &row, err, sizeof err), CLI_JSONL_ROW);
    assert_int_equal(row.n, 2);
    cli_jsonl_row_free(&row);
    /* 17 significant digits parse to the exact double (IEEE 754 binary64):
     * 0.1 is 0x3FB999999999999A, the nearest double to 1/10. */
    assert_int_equal(s_parse("[0.10000000000000001, 5e-324, 1.7976931348623157e308]", &row,
                             err, sizeof err),
                     CLI_JSONL_ROW);
    uint64_t bits;
    memcpy(&bits, &row.genome[0], sizeof bits);
    assert_true(bits == 0x3FB999999999999AULL);
    memcpy(&bits, &row.genome[1], sizeof bits);
    assert_true(bits == 1); /* smallest subnormal */
    memcpy(&bits, &row.genome[2], sizeof bits);
    assert_true(bits == 0x7FEFFFFFFFFFFFFFULL); /* largest finite */
    cli_jsonl_row_free(&row);
    /* The largest genome allowed: PROTO_MAX_GENOME_BYTES / 8 values. */
    size_t n = CLI_JSONL_MAX_VALUES;
    char *big = malloc(n * 2 + 3);
    assert_non_null(big);
    big[0] = '[';
    for (size_t i = 0; i < n; i++) {
        big[1 + 2 * i] = '0';
        big[2 + 2 * i] = ',';
    }
    big[2 * n] = ']';
    big[2 * n + 1] = '\0';
    assert_int_equal(s_parse(big, &row, err, sizeof err), CLI_JSONL_ROW);
    assert_int_equal(row.n, n);
    cli_jsonl_row_free(&row);
    /* One more is one too many. */
    big = realloc(big, n * 2 + 5);
    assert_non_null(big);
    strcpy(big + 2 * n, ",0]");
    assert_int_equal(s_parse(big, &row, err, sizeof err), CLI_JSONL_INVALID);
    assert_non_null(strstr(err, "131073 values; the limit is 131072"));
    cli_jsonl_row_free(&row);
    free(big);
}

static void test_blank_lines(void **state)
{
    (void)state;
    cli_jsonl_row_t row;
    char err[64];
    const char *blanks[] = {"", "\n", "\r\n", "   \t  \n"};
    for (size_t i = 0; i < 4; i++)
        assert_int_equal(s_parse(blanks[i], &row, err, sizeof err), CLI_JSONL_BLANK);
}

static void test_rejected_shapes(void **state)
{
    (void)state;
    static const struct {
        const char *line;
        const char *words; /* must appear in the error */
        const char *id;    /* id kept for the output line */
    } bad[] = {
        {"this is not json", "not JSON", "null"},
        {"[1, 2", "not JSON", "null"},
        {"[1] [2]", "not JSON", "null"},
        {"[NaN, 1]", "NaN and Infinity are not JSON numbers", "null"},
        {"[Infinity]", "NaN and Infinity are not JSON numbers", "null"},
        {"[-Infinity]", "NaN and Infinity are not JSON numbers", "null"},
        {"[1e400]", "not JSON", "null"}, /* out of double range */
        {"[123456789012345678901234567890]", "not JSON", "null"},
        {"\"just a string\"", "not a string", "null"},
        {"42", "not an integer", "null"},
        {"null", "not null", "null"},
        {"[]", "the genome is empty", "null"},
        {"[1, \"two\", 3]", "genome[1] is a string, not a number", "null"},
        {"[1, null]", "genome[1] is null, not a number", "null"},
        {"[[1]]", "genome[0] is an array, not a number", "null"},
        {"[true]", "genome[0] is true, not a number", "null"},
        {"{\"id\": \"x\", \"genome\": \"abc\"}", "\"genome\" must be an array of numbers, not a string",
         "\"x\""},
        {"{\"id\": 3}", "missing \"genome\"", "3"},
        {"{\"id\": [1], \"genome\": [0.5]}", "\"id\" must be a string, number, boolean or null, not an array",
         "null"},
        {"{\"id\": {}, \"genome\": [0.5]}", "not an object", "null"},
        {"{\"genome\": [1], \"genom\": [2]}", "unknown key \"genom\"", "null"},
        {"{\"genome\": [1], \"genome\": [2]}", "not JSON", "null"}, /* duplicate key */
        {"{\"id\": 5, \"genome\": []}", "the genome is empty", "5"},
        {"[\"\xff\"]", "not JSON", "null"}, /* invalid UTF-8 */
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        cli_jsonl_row_t row;
        char err[256];
        int rc = s_parse(bad[i].line, &row, err, sizeof err);
        if (rc != CLI_JSONL_INVALID || !strstr(err, bad[i].words))
            fail_msg("line %zu '%s': rc %d, error '%s', wanted '%s'", i, bad[i].line, rc, err,
                     bad[i].words);
        assert_string_equal(row.id_json, bad[i].id);
        assert_null(row.genome);
        cli_jsonl_row_free(&row);
    }
}

static void test_nul_and_length(void **state)
{
    (void)state;
    cli_jsonl_row_t row;
    char err[256];
    /* A NUL byte inside the line is not JSON (the length, not the NUL, ends a line). */
    const char withnul[] = "[1,\0 2]";
    assert_int_equal(cli_jsonl_parse(withnul, sizeof withnul - 1, &row, err, sizeof err),
                     CLI_JSONL_INVALID);
    cli_jsonl_row_free(&row);
    /* A small error buffer still ends with NUL. */
    char tiny[8];
    assert_int_equal(s_parse("[]", &row, tiny, sizeof tiny), CLI_JSONL_INVALID);
    assert_int_equal(strlen(tiny), 7);
    cli_jsonl_row_free(&row);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),
        cmocka_unit_test(test_accepted_shapes),
        cmocka_unit_test(test_blank_lines),
        cmocka_unit_test(test_rejected_shapes),
        cmocka_unit_test(test_nul_and_length),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
