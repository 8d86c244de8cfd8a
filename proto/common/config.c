/* config.c: the configuration file parser and setting precedence (see
 * config.h). Owns the parsed name/value pairs; not what they mean (each
 * program's main). */
#include "config.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

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
    long number = 0;
    size_t i = 0;
    while (i < len) {
        const char *nl = memchr(text + i, '\n', len - i);
        size_t end = nl ? (size_t)(nl - text) : len;
        const char *line = text + i;
        size_t n = end - i;
        number++;
        i = end + 1;
        for (size_t k = 0; k < n; k++) {
            unsigned char c = (unsigned char)line[k];
            if ((c < 0x20 && c != '\t' && !(c == '\r' && k == n - 1)) || c == 0x7f) {
                snprintf(err, errlen, "line %ld: a control character", number);
                goto cleanup;
            }
        }
        while (n > 0 && (line[n - 1] == '\r' || line[n - 1] == ' ' || line[n - 1] == '\t'))
            n--;
        while (n > 0 && (*line == ' ' || *line == '\t')) {
            line++;
            n--;
        }
        if (n == 0 || line[0] == '#')
            continue;
        const char *eq = memchr(line, '=', n);
        if (!eq) {
            snprintf(err, errlen, "line %ld: expected \"name = value\"", number);
            goto cleanup;
        }
        size_t name_len = (size_t)(eq - line);
        while (name_len > 0 && (line[name_len - 1] == ' ' || line[name_len - 1] == '\t'))
            name_len--;
        for (size_t k = 0; k < name_len; k++) {
            char c = line[k];
            if (!((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_')) {
                snprintf(err, errlen, "line %ld: a name is lower-case letters, digits and '_'",
                         number);
                goto cleanup;
            }
        }
        int idx = s_index(line, name_len);
        if (idx < 0) {
            snprintf(err, errlen, "line %ld: unknown setting '%.*s' (known: broker, key, "
                                  "broker_key, keys_dir)",
                     number, (int)(name_len > 64 ? 64 : name_len), line);
            goto cleanup;
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
            goto cleanup;
        }
        if (self->values[idx]) {
            snprintf(err, errlen, "line %ld: %s is set twice", number, s_known[idx]);
            goto cleanup;
        }
        self->values[idx] = strndup(value, vn);
        if (!self->values[idx]) {
            snprintf(err, errlen, "out of memory");
            goto cleanup;
        }
    }
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
    int fd = open(path, O_RDONLY | O_CLOEXEC | O_NOCTTY);
    if (fd < 0) {
        if (!explicit_path && errno == ENOENT)
            return common_config_parse("", 0, out, err, errlen);
        snprintf(err, errlen, "cannot open config file %s: %s", path, strerror(errno));
        return -1;
    }
    char *buf = malloc(COMMON_CONFIG_MAX_BYTES + 1);
    size_t n = 0;
    int rc = -1;
    if (!buf) {
        snprintf(err, errlen, "out of memory reading %s", path);
        goto cleanup;
    }
    for (;;) {
        ssize_t k = read(fd, buf + n, COMMON_CONFIG_MAX_BYTES + 1 - n);
        if (k < 0 && errno == EINTR)
            continue;
        if (k < 0) {
            snprintf(err, errlen, "cannot read config file %s: %s", path, strerror(errno));
            goto cleanup;
        }
        if (k == 0)
            break;
        n += (size_t)k;
        if (n > COMMON_CONFIG_MAX_BYTES)
            break; /* the parser names the size */
    }
    if (common_config_parse(buf, n, out, err, errlen) != 0) {
        char tmp[512];
        snprintf(tmp, sizeof tmp, "%s", err);
        snprintf(err, errlen, "config file %s: %s", path, tmp);
        goto cleanup;
    }
    if (used && used_len)
        snprintf(used, used_len, "%s", path);
    rc = 0;
cleanup:
    free(buf);
    close(fd);
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
