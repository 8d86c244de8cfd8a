/* cli_util.h: small helpers shared by the CLI's subcommands: strict number
 * parsing, option matching, JSON string escaping. Not the JSON Lines parser
 * (jsonl.h) and nothing of the library. */
#ifndef CLIENT_CLI_UTIL_H
#define CLIENT_CLI_UTIL_H

#include <stdint.h>
#include <stdio.h>

/* Parses a whole decimal string into [min, max]; returns 0 or -1. */
int cli_parse_u64(const char *s, uint64_t min, uint64_t max, uint64_t *out);

/* Option matching for "--name VALUE" and "--name=VALUE". If argv[*i] is
 * option name, sets *value (NULL if the value is missing), advances *i past a
 * separate value, and returns 1; otherwise returns 0. */
int cli_match_value(int argc, char **argv, int *i, const char *name, const char **value);

/* cli_match_value for an option naming a file: returns 1 with *out set,
 * -1 when the file name is missing or empty, 0 when argv[*i] is not name. */
int cli_match_file(int argc, char **argv, int *i, const char *name, const char **out);

/* Writes s as a JSON string (quotes included); invalid UTF-8 becomes U+FFFD. */
void cli_json_string(FILE *f, const char *s);

#endif
