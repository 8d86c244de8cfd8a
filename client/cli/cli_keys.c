/* cli_keys.c: shared security options of the CLI (see cli_keys.h). Owns the
 * parsed options and the loaded config file for the life of the process. */
#include "cli_keys.h"

#include <stdio.h>
#include <string.h>

#include "cli_util.h"
#include "common/config.h"

static const char *s_key, *s_broker_key, *s_config;
static int s_insecure;
static common_config_t *s_file; /* kept to exit: resolved strings point into it */

const char cli_keys_help[] =
    "  --key FILE         this client's secret key (fitfarm keygen NAME); or\n"
    "                     FITFARM_KEY, or 'key =' in the config file\n"
    "  --broker-key FILE  the broker's public key; or FITFARM_BROKER_KEY, or\n"
    "                     'broker_key =' in the config file (the broker endpoint may\n"
    "                     also come from FITFARM_BROKER or 'broker =')\n"
    "  --config FILE      settings file (default $XDG_CONFIG_HOME/fitfarm/config or\n"
    "                     ~/.config/fitfarm/config); flags beat environment beat file\n"
    "  --insecure         plaintext, no keys: only to ipc://, inproc:// or loopback\n";

int cli_keys_option(int argc, char **argv, int *i, const char *prog, int *exit_code)
{
    const char *v = NULL;
    const char **slot = NULL;
    if (strcmp(argv[*i], "--insecure") == 0) {
        s_insecure = 1;
        return 1;
    }
    if (cli_match_value(argc, argv, i, "--key", &v))
        slot = &s_key;
    else if (cli_match_value(argc, argv, i, "--broker-key", &v))
        slot = &s_broker_key;
    else if (cli_match_value(argc, argv, i, "--config", &v))
        slot = &s_config;
    else
        return 0;
    if (!v || !*v) {
        fprintf(stderr, "%s: %s needs a file (see %s --help)\n", prog, argv[*i], prog);
        *exit_code = 2;
        return -1;
    }
    *slot = v;
    return 1;
}

int cli_keys_apply(fitfarm_options_t *opts, const char *prog)
{
    char err[768];
    if (!s_file && common_config_load(s_config, &s_file, NULL, 0, err, sizeof err) != 0) {
        fprintf(stderr, "%s: %s\n", prog, err);
        return -1;
    }
    if (!opts->broker)
        opts->broker = common_config_resolve(NULL, "FITFARM_BROKER", s_file, "broker", NULL);
    opts->insecure = s_insecure;
    if (!s_insecure) {
        opts->key_file = common_config_resolve(s_key, "FITFARM_KEY", s_file, "key", NULL);
        opts->broker_key_file =
            common_config_resolve(s_broker_key, "FITFARM_BROKER_KEY", s_file, "broker_key", NULL);
    }
    return 0;
}
