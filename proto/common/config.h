/* config.h: fitfarm's configuration file and the precedence of settings.
 *
 * Format (ours): UTF-8 text, one "name = value" per line; '#' starts a
 * comment line; blank lines are ignored; names are lower-case letters, digits
 * and '_'; the value is the rest of the line with surrounding blanks removed
 * (no quoting: a path may contain spaces; a path value "~" or "~/..." is
 * under $HOME, "~user" is left as written). Known names (one file may serve the
 * broker, a worker and the CLI; each reads the names it needs):
 *     broker      the broker's endpoint (worker: workers endpoint; CLI: clients endpoint)
 *     key         this program's own .secret key file
 *     broker_key  the broker's .public key file (worker, CLI)
 *     keys_dir    the broker's allow-list folder (broker)
 * An unknown name, a repeated name, a line without '=', an empty value, a
 * control character or a file over 64 KiB is an error naming the line.
 *
 * Precedence, highest first: command-line flag, environment variable
 * (FITFARM_BROKER, FITFARM_KEY, FITFARM_BROKER_KEY, FITFARM_KEYS_DIR), the
 * config file (--config FILE, else $XDG_CONFIG_HOME/fitfarm/config, else
 * ~/.config/fitfarm/config), then the built-in default. Nothing here aborts. */
#ifndef COMMON_CONFIG_H
#define COMMON_CONFIG_H

#include <stddef.h>

#define COMMON_CONFIG_MAX_BYTES 65536
#define COMMON_CONFIG_VALUE_MAX 4096

typedef struct common_config common_config_t;

/* Parses config text. On success *out is new (caller destroys). Returns 0, or
 * -1 with a sentence naming the line in err. */
int common_config_parse(const char *text, size_t len, common_config_t **out, char *err,
                        size_t errlen);
/* Loads explicit_path if not NULL (missing: an error), else the default path
 * (missing: an empty config). Returns 0 or -1 with err naming the file. The
 * path used is copied to used (may be NULL) or "" when none was read. */
int common_config_load(const char *explicit_path, common_config_t **out, char *used,
                       size_t used_len, char *err, size_t errlen);
void common_config_destroy(common_config_t **self_p);

/* The value of name, or NULL. Borrowed, valid until destroy. */
const char *common_config_get(const common_config_t *self, const char *name);

/* Resolves one setting by precedence: flag (if not NULL), then the
 * environment variable env (if set and not empty), then the config file's
 * name, else NULL. *source (if not NULL) gets "flag", the variable's name,
 * "config" or "default". Borrowed strings. */
const char *common_config_resolve(const char *flag, const char *env, const common_config_t *cfg,
                                  const char *name, const char **source);

#endif
