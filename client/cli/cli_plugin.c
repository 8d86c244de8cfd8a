/* cli_plugin.c: plugin files loaded into the CLI and their declared
 * objective names (cli_plugin.h). A plugin is trusted code once loaded,
 * but what it declares for display is still checked: a label reaches
 * terminals, SVG text and file names' neighbours, so it must be short,
 * valid UTF-8 and free of control characters. */
#include "cli_plugin.h"

#include <dlfcn.h>
#include <jansson.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "cli_util.h"
#include "limits.h"
#include "version.h"

#define CLI_PLUGIN_MAX_GENES (PROTO_MAX_GENOME_BYTES / 8u)

size_t cli_plugin_dirs(const char **dirs, size_t n_given)
{
    return n_given + worker_default_plugin_dirs(dirs + n_given, CLI_PLUGIN_MAX_DIRS - n_given);
}

int cli_plugin_match(int argc, char **argv, int *i, unsigned which, cli_plugin_args_t *a, char *err,
                     size_t errlen)
{
    const char *v = NULL;
    if ((which & CLI_PLUGIN_ARGS_DIRS) && cli_match_value(argc, argv, i, "--plugin-dir", &v)) {
        if (!v || !*v) {
            snprintf(err, errlen, "--plugin-dir needs a directory");
            return -1;
        }
        if (a->ndirs == WORKER_MAX_PLUGIN_DIRS) {
            snprintf(err, errlen, "at most %d --plugin-dir options", WORKER_MAX_PLUGIN_DIRS);
            return -1;
        }
        a->dirs[a->ndirs++] = v;
        return 1;
    }
    if (!(which & CLI_PLUGIN_ARGS_EVAL))
        return 0;
    if (cli_match_value(argc, argv, i, "--genome", &v)) {
        if (!v)
            snprintf(err, errlen, "--genome needs a JSON array");
        a->genome = v;
    } else if (cli_match_value(argc, argv, i, "--params", &v)) {
        if (!v)
            snprintf(err, errlen, "--params needs a JSON object");
        a->params = v ? v : a->params;
    } else if (cli_match_value(argc, argv, i, "--seed", &v)) {
        if (!v || cli_parse_u64(v, 0, UINT64_MAX, &a->seed) < 0) {
            snprintf(err, errlen, "--seed needs a number in 0..2^64-1, not '%.64s'", v ? v : "");
            v = NULL;
        }
    } else {
        return 0;
    }
    return v ? 1 : -1;
}

/* A plugin name as the ABI allows it: [a-z0-9_-]+, at most 64 bytes. */
static int s_valid_name(const char *s)
{
    size_t n = strlen(s);
    if (n == 0 || n > 64)
        return 0;
    for (size_t i = 0; i < n; i++) {
        char c = s[i];
        if (!((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' || c == '-'))
            return 0;
    }
    return 1;
}

const fitfarm_plugin_t *cli_plugin_open(const char *ref, const char *const *dirs, void **dl,
                                        char *err, size_t errlen)
{
    char path[4096];
    *dl = NULL;
    /* NAME@VERSION as --plugin takes it elsewhere: the file is found by
     * NAME (one file per name in a folder), the version only checked. */
    char plugin[PROTO_MAX_NAME_BYTES + 1] = "";
    const char *constraint = NULL;
    if (strchr(ref, '/')) {
        *dl = dlopen(ref, RTLD_NOW | RTLD_LOCAL);
        if (!*dl) {
            snprintf(err, errlen, "cannot load %s: %s", ref, dlerror());
            return NULL;
        }
        snprintf(plugin, sizeof plugin, "%s", ref); /* for the messages below */
    } else if (strlen(ref) > PROTO_MAX_NAME_BYTES) {
        snprintf(err, errlen, "'%.80s...' is longer than a plugin name (%u bytes)", ref,
                 PROTO_MAX_NAME_BYTES);
        return NULL;
    } else if (strchr(ref, '@') &&
               proto_plugin_ref_split(ref, plugin, sizeof plugin, &constraint, err, errlen) != 0) {
        return NULL;
    } else {
        if (!constraint)
            snprintf(plugin, sizeof plugin, "%s", ref);
        if (!s_valid_name(plugin)) {
            snprintf(err, errlen, "'%.80s' is not a plugin name ([a-z0-9_-]+) nor a path", plugin);
            return NULL;
        }
        char tried[1024] = "";
        size_t used = 0;
        for (size_t i = 0; dirs[i] && !*dl; i++) {
            snprintf(path, sizeof path, "%s/%s.so", dirs[i], plugin);
            *dl = dlopen(path, RTLD_NOW | RTLD_LOCAL);
            if (!*dl && used < sizeof tried) {
                int w =
                    snprintf(tried + used, sizeof tried - used, "%s%s", used ? ", " : "", dirs[i]);
                if (w > 0)
                    used += (size_t)w;
            }
        }
        if (!*dl) {
            snprintf(err, errlen, "no plugin '%s' (looked for %s.so in: %s)", plugin, plugin,
                     used ? tried : "no directories");
            return NULL;
        }
    }
    const fitfarm_plugin_t *(*entry)(void) =
        (const fitfarm_plugin_t *(*)(void))dlsym(*dl, FITFARM_PLUGIN_SYMBOL);
    const fitfarm_plugin_t *p = entry ? entry() : NULL;
    if (!p) {
        snprintf(err, errlen, "%s has no %s descriptor", plugin, FITFARM_PLUGIN_SYMBOL);
    } else if (p->abi_version != FITFARM_PLUGIN_ABI) {
        snprintf(err, errlen, "%s speaks plugin ABI %u, this build %u", plugin,
                 (unsigned)p->abi_version, (unsigned)FITFARM_PLUGIN_ABI);
        p = NULL;
    } else if (!p->name || !p->version || !p->create || !p->evaluate || !p->destroy) {
        snprintf(err, errlen, "%s has an incomplete descriptor", plugin);
        p = NULL;
    }
    if (p && constraint && !proto_version_matches(p->version, constraint))
        fprintf(stderr, "fitfarm: note: the plugin file found for %s is %s version %s, which "
                "does not match %s; using it\n", ref, p->name, p->version, constraint);
    if (!p) {
        dlclose(*dl);
        *dl = NULL;
    }
    return p;
}

/* Printable UTF-8 (RFC 3629: shortest forms, no surrogates, at most
 * U+10FFFF) without C0 or C1 controls or DEL. Returns 1 when s[0..n) is. */
static int s_printable_utf8(const unsigned char *s, size_t n)
{
    for (size_t i = 0; i < n;) {
        unsigned c = s[i];
        if (c < 0x80) {
            if (c < 0x20 || c == 0x7f)
                return 0;
            i++;
            continue;
        }
        size_t len = c >= 0xf0 ? 4 : c >= 0xe0 ? 3 : c >= 0xc0 ? 2 : 0;
        if (len == 0 || c > 0xf4 || i + len > n)
            return 0;
        uint32_t cp = c & (0x7fu >> len);
        for (size_t k = 1; k < len; k++) {
            if ((s[i + k] & 0xc0) != 0x80)
                return 0;
            cp = (cp << 6) | (s[i + k] & 0x3fu);
        }
        static const uint32_t least[5] = {0, 0, 0x80, 0x800, 0x10000};
        if (cp < least[len] || cp > 0x10ffff || (cp >= 0xd800 && cp <= 0xdfff) ||
            (cp >= 0x80 && cp <= 0x9f))
            return 0;
        i += len;
    }
    return 1;
}

/* One declared string: present (unless optional), within max bytes, printable. */
static int s_check_text(const char *plugin, size_t i, const char *what, const char *s, size_t min,
                        size_t max, char *err, size_t errlen)
{
    size_t len = s ? strnlen(s, max + 1) : 0;
    if (len < min || len > max) {
        snprintf(err, errlen, "plugin %s: %s entry %zu: the %s is %s; %zu to %zu bytes are allowed",
                 plugin, FITFARM_PLUGIN_OBJECTIVE_NAMES_SYMBOL, i, what,
                 len > max ? "too long" : "empty", min, max);
        return -1;
    }
    if (!s_printable_utf8((const unsigned char *)s, len)) {
        snprintf(err, errlen,
                 "plugin %s: %s entry %zu: the %s is not printable UTF-8 (a control "
                 "character or a bad byte sequence)",
                 plugin, FITFARM_PLUGIN_OBJECTIVE_NAMES_SYMBOL, i, what);
        return -1;
    }
    return 0;
}

int cli_plugin_objectives(void *dl, const char *plugin, const fitfarm_plugin_objective_t **list,
                          size_t *count, char *err, size_t errlen)
{
    *list = NULL;
    *count = 0;
    dlerror();
    void *sym = dlsym(dl, FITFARM_PLUGIN_OBJECTIVE_NAMES_SYMBOL);
    if (!sym)
        return 0;
    const fitfarm_plugin_objective_t *l = *(const fitfarm_plugin_objective_t *const *)sym;
    if (!l) {
        snprintf(err, errlen,
                 "plugin %s: %s is a NULL pointer (do not export it, or point it at "
                 "a list ended by {NULL, NULL})",
                 plugin, FITFARM_PLUGIN_OBJECTIVE_NAMES_SYMBOL);
        return -1;
    }
    size_t n = 0;
    for (; l[n].name; n++) {
        if (n == FITFARM_PLUGIN_MAX_OBJECTIVE_NAMES) {
            snprintf(err, errlen,
                     "plugin %s: %s has more than %d entries (or lacks its {NULL, "
                     "NULL} end)",
                     plugin, FITFARM_PLUGIN_OBJECTIVE_NAMES_SYMBOL,
                     FITFARM_PLUGIN_MAX_OBJECTIVE_NAMES);
            return -1;
        }
        if (s_check_text(plugin, n, "name", l[n].name, 1, FITFARM_PLUGIN_MAX_OBJECTIVE_NAME_BYTES,
                         err, errlen) != 0 ||
            (l[n].unit && s_check_text(plugin, n, "unit", l[n].unit, 0,
                                       FITFARM_PLUGIN_MAX_OBJECTIVE_UNIT_BYTES, err, errlen) != 0))
            return -1;
    }
    *list = n ? l : NULL;
    *count = n;
    return 0;
}

void cli_plugin_label(const fitfarm_plugin_objective_t *list, size_t count, size_t i, char *out,
                      size_t outlen)
{
    if (i >= count)
        snprintf(out, outlen, "f%zu", i + 1);
    else if (list[i].unit && list[i].unit[0])
        snprintf(out, outlen, "%s (%s)", list[i].name, list[i].unit);
    else
        snprintf(out, outlen, "%s", list[i].name);
}

uint8_t *cli_plugin_genome(const char *text, size_t *len, char *err, size_t errlen)
{
    json_error_t jerr;
    json_t *arr = json_loads(text, 0, &jerr);
    uint8_t *out = NULL;
    if (!arr) {
        snprintf(err, errlen, "--genome is not valid JSON: %s", jerr.text);
        goto cleanup;
    }
    size_t n = json_is_array(arr) ? json_array_size(arr) : 0;
    if (!json_is_array(arr) || n > CLI_PLUGIN_MAX_GENES) {
        snprintf(err, errlen, "--genome must be a JSON array of at most %u numbers",
                 CLI_PLUGIN_MAX_GENES);
        goto cleanup;
    }
    out = malloc(n ? n * 8 : 1);
    if (!out) {
        snprintf(err, errlen, "out of memory");
        goto cleanup;
    }
    for (size_t i = 0; i < n; i++) {
        json_t *v = json_array_get(arr, i);
        if (!json_is_number(v)) {
            snprintf(err, errlen, "--genome[%zu] is not a number", i);
            free(out);
            out = NULL;
            goto cleanup;
        }
        double d = json_number_value(v);
        uint64_t bits;
        memcpy(&bits, &d, sizeof bits);
        for (int b = 0; b < 8; b++)
            out[i * 8 + (size_t)b] = (uint8_t)(bits >> (8 * b));
    }
    *len = n * 8;
cleanup:
    json_decref(arr);
    return out;
}
