/* cli_keys.h: the security options every CLI command that talks to a broker
 * shares (--key, --broker-key, --config, --insecure) and their resolution by
 * precedence: flag, then environment (FITFARM_KEY, FITFARM_BROKER_KEY,
 * FITFARM_BROKER), then the config file (common/config.h). One set per
 * process (the CLI runs one command). Not here: key files (common/keyfile.h). */
#ifndef CLIENT_CLI_KEYS_H
#define CLIENT_CLI_KEYS_H

#include "client/include/fitfarm.h"

/* If argv[*i] is one of the shared options, takes it (and its value) and
 * returns 1; returns 0 if not ours; -1 on a missing value (message printed
 * with prog, *exit_code set to 2). */
int cli_keys_option(int argc, char **argv, int *i, const char *prog, int *exit_code);

/* Fills opts->key_file, broker_key_file and insecure, and opts->broker when
 * it is NULL and the environment or config file name one. Returns 0, or -1
 * after printing why (a config file that does not parse). Strings stay valid
 * until the process ends. */
int cli_keys_apply(fitfarm_options_t *opts, const char *prog);

/* The help lines for these options. */
extern const char cli_keys_help[];

#endif
