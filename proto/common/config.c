/* config.c: the configuration file parser and setting precedence (see
 * config.h). Owns the parsed name/value pairs; not what they mean (each
 * program's main). */
#include "config.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "textfile.h"

static const char *const s_known[] = {"broker", "key", "broker_key", "keys_dir"};
#define S_N_KNOWN (sizeof s_known / sizeof *s_known)

struct common_config {
    char *values[S_N_KNOWN];
};

static int s_index(const char *name, size_t n)
{
    for (size_t i = 0; i < S_N_KNOWN; i++)
        if (strlen(s_known[i]) == n && memcmp(s_known[i], name, n) == 0)
            return (int)i;
    return -1;
}

/* One "name = value" line into self (a common_config_t). */
static int s_line(const char *line, size_t n, long number, void *arg, char *err, size_t errlen)
{
    common_config_t *self = arg;
    const char *eq = memchr(line, '=', n);
    if (!eq) {
        snprintf(err, errlen, "line %ld: expected \"name = value\"", number);
        return -1;
    }
    size_t name_len = (size_t)(eq - line);
    while (name_len > 0 && (line[name_len - 1] == ' ' || line[name_len - 1] == '\t'))
        name_len--;
    for (size_t k = 0; k < name_len; k++) {
        char c = line[k];
        if (!((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_')) {
            snprintf(err, errlen, "line %ld: a name is lower-case letters, digits and '_'",
                     number);
            return -1;
        }
    }
    int idx = s_index(line, name_len);
    if (idx < 0) {
        snprintf(err, errlen, "line %ld: unknown setting '%.*s' (known: broker, key, "
                              "broker_key, keys_dir)",
                 number, (int)(name_len > 64 ? 64 : name_len), line);
        return -1;
    }
    const char *value = eq + 1;
    size_t vn = n - (size_t)(value - line);
    while (vn > 0 && (*value == ' ' || *value == '\t')) {
        value++;
        vn--;
    }
    if (vn == 0 || vn > COMMON_CONFIG_VALUE_MAX) {
        snprintf(err, errlen, "line %ld: %s needs a value of 1 to %d bytes", number,
                 s_known[idx], COMMON_CONFIG_VALUE_MAX);
        return -1;
    }
    if (self->values[idx]) {
        snprintf(err, errlen, "line %ld: %s is set twice", number, s_known[idx]);
        return -1;
    }
    /* Paths starting "~/" (or just "~") are under $HOME, as in a shell:
     * users write them so and expect them to work. "~user" is not expanded. */
    const char *home = "";
    size_t hn = 0;
    if (idx != 0 && value[0] == '~' && (vn == 1 || value[1] == '/')) {
        home = getenv("HOME");
        if (!home || home[0] != '/') {
            snprintf(err, errlen, "line %ld: %s starts with ~ but HOME is not set to a folder",
                     number, s_known[idx]);
            return -1;
        }
        hn = strlen(home);
        value++;
        vn--;
        if (hn + vn > COMMON_CONFIG_VALUE_MAX) {
            snprintf(err, errlen, "line %ld: %s is longer than %d bytes once ~ is expanded",
                     number, s_known[idx], COMMON_CONFIG_VALUE_MAX);
            return -1;
        }
    }
    self->values[idx] = malloc(hn + vn + 1);
    if (!self->values[idx]) {
        snprintf(err, errlen, "out of memory");
        return -1;
    }
    memcpy(self->values[idx], home, hn);
    memcpy(self->values[idx] + hn, value, vn);
    self->values[idx][hn + vn] = '\0';
    return 0;
}

int common_config_parse(const char *text, size_t len, common_config_t **out, char *err,
                        size_t errlen)
{
    *out = NULL;
    common_config_t *self = calloc(1, sizeof *self);
    int rc = -1;
    if (!self) {
        snprintf(err, errlen, "out of memory");
        return -1;
    }
    if (len > COMMON_CONFIG_MAX_BYTES) {
        snprintf(err, errlen, "%zu bytes: larger than a config file may be (%d)", len,
                 COMMON_CONFIG_MAX_BYTES);
        goto cleanup;
    }
    if (common_textfile_lines(text, len, COMMON_TEXTFILE_NO_CONTROLS, s_line, self, err,
                              errlen) != 0)
        goto cleanup;
    *out = self;
    self = NULL;
    rc = 0;
cleanup:
    common_config_destroy(&self);
    return rc;
}

void common_config_destroy(common_config_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    for (size_t i = 0; i < S_N_KNOWN; i++)
        free((*self_p)->values[i]);
    free(*self_p);
    *self_p = NULL;
}

const char *common_config_get(const common_config_t *self, const char *name)
{
    if (!self)
        return NULL;
    int idx = s_index(name, strlen(name));
    return idx < 0 ? NULL : self->values[idx];
}

int common_config_load(const char *explicit_path, common_config_t **out, char *used,
                       size_t used_len, char *err, size_t errlen)
{
    *out = NULL;
    char path[4096];
    if (used && used_len)
        used[0] = '\0';
    if (explicit_path) {
        snprintf(path, sizeof path, "%s", explicit_path);
    } else {
        const char *xdg = getenv("XDG_CONFIG_HOME");
        const char *home = getenv("HOME");
        if (xdg && xdg[0] == '/')
            snprintf(path, sizeof path, "%s/fitfarm/config", xdg);
        else if (home && home[0] == '/')
            snprintf(path, sizeof path, "%s/.config/fitfarm/config", home);
        else
            return common_config_parse("", 0, out, err, errlen);
    }
    char *buf = NULL;
    size_t n = 0;
    int rc = common_textfile_read(path, "config file", COMMON_CONFIG_MAX_BYTES,
                                  explicit_path ? 0 : COMMON_TEXTFILE_MISSING_OK, &buf, &n,
                                  NULL, err, errlen);
    if (rc == COMMON_TEXTFILE_MISSING)
        return common_config_parse("", 0, out, err, errlen);
    if (rc < 0)
        return -1;
    rc = -1; /* the parser names a size over the cap (TOO_LONG hands it cap + 1 bytes) */
    if (common_config_parse(buf, n, out, err, errlen) != 0) {
        common_textfile_prefix(err, errlen, "config file", path);
        goto cleanup;
    }
    if (used && used_len)
        snprintf(used, used_len, "%s", path);
    rc = 0;
cleanup:
    free(buf);
    return rc;
}

const char *common_config_resolve(const char *flag, const char *env, const common_config_t *cfg,
                                  const char *name, const char **source)
{
    const char *v;
    if (flag) {
        if (source)
            *source = "flag";
        return flag;
    }
    if (env && (v = getenv(env)) && v[0]) {
        if (source)
            *source = env;
        return v;
    }
    if ((v = common_config_get(cfg, name))) {
        if (source)
            *source = "config";
        return v;
    }
    if (source)
        *source = "default";
    return NULL;
}
