/* cli_plugin.h: loading a plugin file into the command-line tool itself
 * (`fitfarm sim`, `fitfarm show`, `fitfarm front --plugin`) and reading
 * what it declares for people: its objectives' names and units
 * (fitfarm_plugin_objective_names, fitfarm_plugin.h). Only the CLI dlopens
 * plugins outside the worker; libfitfarm never does. Not here: the worker's
 * registry (its own, private), evaluating (the callers do that). */
#ifndef CLIENT_CLI_PLUGIN_H
#define CLIENT_CLI_PLUGIN_H

#include <stddef.h>
#include <stdint.h>

#include "fitfarm_plugin.h"
#include "worker/worker.h"

/* Room for the --plugin-dir folders, the default folders and NULL. */
#define CLI_PLUGIN_MAX_DIRS (2 * WORKER_MAX_PLUGIN_DIRS + 1)

/* "name (unit)", or "name" without a unit: the longest axis label. */
#define CLI_PLUGIN_LABEL_BYTES                                                                     \
    (FITFARM_PLUGIN_MAX_OBJECTIVE_NAME_BYTES + FITFARM_PLUGIN_MAX_OBJECTIVE_UNIT_BYTES + 4)

/* The options every command that loads a plugin shares. */
typedef struct {
    const char *genome;                    /* --genome JSON array; NULL until given */
    const char *params;                    /* --params JSON object; set it to "{}" first */
    uint64_t seed;                         /* --seed, 0..2^64-1 */
    const char *dirs[CLI_PLUGIN_MAX_DIRS]; /* --plugin-dir, in order */
    size_t ndirs;
} cli_plugin_args_t;

#define CLI_PLUGIN_ARGS_DIRS 0x1u /* --plugin-dir */
#define CLI_PLUGIN_ARGS_EVAL 0x2u /* --genome, --params, --seed */

/* Matches the option at argv[*i] among those of which (CLI_PLUGIN_ARGS_*)
 * into a. Returns 1 matched, 0 not one of them, -1 a bad or missing value
 * with a sentence for the command's usage message in err. */
int cli_plugin_match(int argc, char **argv, int *i, unsigned which, cli_plugin_args_t *a, char *err,
                     size_t errlen);

/* Appends the default plugin folders (worker_default_plugin_dirs) after the
 * n_given ones already in dirs, which holds CLI_PLUGIN_MAX_DIRS entries;
 * NULL-terminates. Returns the new count. */
size_t cli_plugin_dirs(const char **dirs, size_t n_given);

/* Loads PLUGIN: a path as given (it has a '/'), or NAME.so from the first of
 * dirs (NULL-terminated) that has it; NAME@VERSION (as --plugin takes it for
 * the pool) finds the file by NAME, and says on stderr when the file's
 * version does not match VERSION (proto/version.h), using it anyway. Returns the descriptor, borrowed from
 * *dl (the caller dlcloses it), or NULL with a sentence in err. */
const fitfarm_plugin_t *cli_plugin_open(const char *plugin, const char *const *dirs, void **dl,
                                        char *err, size_t errlen);

/* The plugin's declared objectives, checked against fitfarm_plugin.h's
 * bounds (count, lengths, printable UTF-8). Sets *list (borrowed from dl;
 * NULL when not declared) and *count. Returns 0, or -1 with a sentence
 * naming the bad entry in err. */
int cli_plugin_objectives(void *dl, const char *plugin, const fitfarm_plugin_objective_t **list,
                          size_t *count, char *err, size_t errlen);

/* Parses a JSON array of numbers (--genome) into little-endian doubles,
 * the wire form of an f64 genome. Returns a malloc'd buffer (caller frees)
 * and its length in *len, or NULL with a sentence in err. */
uint8_t *cli_plugin_genome(const char *text, size_t *len, char *err, size_t errlen);

/* The axis label of objective i (0-based) into out (CLI_PLUGIN_LABEL_BYTES):
 * "name (unit)", "name", or "f<i+1>" past the list's end. */
void cli_plugin_label(const fitfarm_plugin_objective_t *list, size_t count, size_t i, char *out,
                      size_t outlen);

#endif
