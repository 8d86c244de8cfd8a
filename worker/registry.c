/* registry.c: loading and validating plugins, and the default plugin folders.
 *
 * Owns: scanning plugin directories, dlopen/dlsym, checking each descriptor
 * before anything calls it, first-wins on duplicate names (so at most one
 * version of each plugin per worker, said when a second one is skipped), the BLAKE2b build
 * digest of every file, and exec plugin registration. Not owned: running
 * plugins (child.c), reporting them (loop.c). */
#include "registry.h"

#include <dirent.h>
#include <dlfcn.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/log.h"
#include "key.h"
#include "limits.h"
#include "params.h"
#include "worker.h"
#ifdef FITFARM_HAVE_EXEC
#include "exec_plugin.h"
#endif

struct worker_registry {
    worker_plugin_t *plugins;
    size_t count, cap;
};

worker_registry_t *worker_registry_new(void)
{
    return common_xcalloc(1, sizeof(worker_registry_t));
}

void worker_registry_destroy(worker_registry_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    worker_registry_t *self = *self_p;
    for (size_t i = 0; i < self->count; i++) {
        worker_plugin_t *p = &self->plugins[i];
#ifdef FITFARM_HAVE_EXEC
        if (p->exec)
            worker_exec_plugin_destroy(&p->plugin);
#endif
        if (p->dl)
            dlclose(p->dl);
        free(p->origin);
        free(p->param_defaults);
    }
    free(self->plugins);
    free(self);
    *self_p = NULL;
}

int worker_registry_check_descriptor(const fitfarm_plugin_t *p, char *err, size_t errlen)
{
    if (!p) {
        snprintf(err, errlen, "descriptor is NULL");
        return -1;
    }
    if (p->abi_version != FITFARM_PLUGIN_ABI) {
        snprintf(err, errlen, "plugin ABI version %u, this worker speaks %u", p->abi_version,
                 (unsigned)FITFARM_PLUGIN_ABI);
        return -1;
    }
    if (!p->name || !p->name[0]) {
        snprintf(err, errlen, "plugin has no name");
        return -1;
    }
    size_t n = strnlen(p->name, PROTO_MAX_NAME_BYTES);
    if (n >= PROTO_MAX_NAME_BYTES) {
        snprintf(err, errlen, "plugin name longer than %u bytes", PROTO_MAX_NAME_BYTES - 1);
        return -1;
    }
    for (size_t i = 0; i < n; i++) {
        char c = p->name[i];
        if (!((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' || c == '-')) {
            snprintf(err, errlen, "plugin name \"%.64s\" has a character outside [a-z0-9_-]",
                     p->name);
            return -1;
        }
    }
    if (!p->version || !p->version[0] ||
        strnlen(p->version, PROTO_MAX_NAME_BYTES) >= PROTO_MAX_NAME_BYTES) {
        snprintf(err, errlen, "plugin %s: version must be 1 to %u bytes", p->name,
                 PROTO_MAX_NAME_BYTES - 1);
        return -1;
    }
    for (const char *c = p->version; *c; c++)
        if (*c < 0x21 || *c > 0x7e) {
            snprintf(err, errlen, "plugin %s: version has a non-printable or blank character",
                     p->name);
            return -1;
        }
    if (p->objectives < 1 || p->objectives > PROTO_MAX_OBJECTIVES) {
        snprintf(err, errlen, "plugin %s: %u objectives, must be 1 to %u", p->name,
                 p->objectives, PROTO_MAX_OBJECTIVES);
        return -1;
    }
    if (!p->create || !p->evaluate || !p->destroy) {
        snprintf(err, errlen, "plugin %s: create, evaluate or destroy is NULL", p->name);
        return -1;
    }
    return 0;
}

static void s_append(worker_registry_t *self, const worker_plugin_t *entry)
{
    if (self->count == self->cap) {
        self->cap = self->cap ? self->cap * 2 : 16;
        self->plugins = common_xrealloc(self->plugins, self->cap, sizeof *self->plugins);
    }
    self->plugins[self->count++] = *entry;
}

static void s_log_loaded(const worker_plugin_t *e)
{
    char hex[2 * PROTO_DIGEST_BYTES + 1];
    proto_hex(e->digest, PROTO_DIGEST_BYTES, hex);
    char seeds[FITFARM_PLUGIN_MAX_SEED_PARAMS * (FITFARM_PLUGIN_MAX_SEED_PARAM_CHARS + 2) + 64] = "";
    size_t used = 0;
    for (uint32_t i = 0; i < e->n_seed_params; i++)
        used += (size_t)snprintf(seeds + used, sizeof seeds - used, "%s%s",
                                 i ? ", " : "; deterministic when 0: ", e->seed_params[i]);
    LOG_INFO("plugin %s %s (%u objectives, %s%s%s%.200s) from %s, digest %.16s",
             e->plugin->name, e->plugin->version, e->plugin->objectives,
             (e->plugin->flags & FITFARM_PLUGIN_DETERMINISTIC) ? "deterministic" : "stochastic",
             seeds, e->param_defaults ? "; defaults " : "",
             e->param_defaults ? e->param_defaults : "", e->origin, hex);
}

/* The optional seed params list (fitfarm_plugin.h): at most
 * FITFARM_PLUGIN_MAX_SEED_PARAMS names of 1..FITFARM_PLUGIN_MAX_SEED_PARAM_CHARS
 * characters of [a-z0-9_], no name twice. The list is read with bounded
 * scans, so a list without its NULL terminator or a name without its NUL is
 * caught at the bound (the memory is the plugin's own data). Anything else
 * refuses the plugin: a wrong list would key requests without a seed that
 * they depend on. Returns 0 (e filled, or left empty when not exported) or
 * -1 with a sentence in err. */
static int s_seed_params(void *dl, const char *plugin, worker_plugin_t *e, char *err,
                         size_t errlen)
{
    dlerror();
    void *sym = dlsym(dl, FITFARM_PLUGIN_SEED_PARAMS_SYMBOL);
    if (!sym)
        return 0;
    const char *const *list = *(const char *const *const *)sym;
    if (!list) {
        snprintf(err, errlen, "plugin %s: %s is a NULL pointer (do not export it, or point it at "
                 "a NULL-terminated list)", plugin, FITFARM_PLUGIN_SEED_PARAMS_SYMBOL);
        return -1;
    }
    uint32_t n = 0;
    for (; list[n]; n++) {
        if (n == FITFARM_PLUGIN_MAX_SEED_PARAMS) {
            snprintf(err, errlen, "plugin %s: %s lists more than %d names (or lacks its NULL "
                     "terminator)", plugin, FITFARM_PLUGIN_SEED_PARAMS_SYMBOL,
                     FITFARM_PLUGIN_MAX_SEED_PARAMS);
            return -1;
        }
        const char *name = list[n];
        size_t len = strnlen(name, FITFARM_PLUGIN_MAX_SEED_PARAM_CHARS + 1);
        if (len == 0 || len > FITFARM_PLUGIN_MAX_SEED_PARAM_CHARS) {
            snprintf(err, errlen, "plugin %s: %s name %u is %s; names are 1 to %d characters",
                     plugin, FITFARM_PLUGIN_SEED_PARAMS_SYMBOL, (unsigned)n,
                     len ? "too long" : "empty", FITFARM_PLUGIN_MAX_SEED_PARAM_CHARS);
            return -1;
        }
        for (size_t i = 0; i < len; i++) {
            char c = name[i];
            if (!((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_')) {
                snprintf(err, errlen, "plugin %s: %s name \"%.64s\" has a character outside "
                         "[a-z0-9_]", plugin, FITFARM_PLUGIN_SEED_PARAMS_SYMBOL, name);
                return -1;
            }
        }
        for (uint32_t j = 0; j < n; j++)
            if (strcmp(list[j], name) == 0) {
                snprintf(err, errlen, "plugin %s: %s lists \"%s\" twice", plugin,
                         FITFARM_PLUGIN_SEED_PARAMS_SYMBOL, name);
                return -1;
            }
    }
    e->seed_params = n ? list : NULL;
    e->n_seed_params = n;
    return 0;
}

/* The optional param defaults (fitfarm_plugin.h): a JSON object within
 * PROTO_MAX_PARAMS_BYTES, read with a bounded scan (the text is the
 * plugin's own data). Returns 0 (e->param_defaults canonical, or NULL when
 * not exported) or -1 with a sentence in err: wrong defaults would key two
 * meanings as one, so the plugin is refused. */
static int s_param_defaults(void *dl, const char *plugin, worker_plugin_t *e, char *err,
                            size_t errlen)
{
    dlerror();
    void *sym = dlsym(dl, FITFARM_PLUGIN_PARAM_DEFAULTS_SYMBOL);
    if (!sym)
        return 0;
    const char *text = *(const char *const *)sym;
    if (!text) {
        snprintf(err, errlen, "plugin %s: %s is a NULL pointer (do not export it, or point it "
                 "at a JSON object)", plugin, FITFARM_PLUGIN_PARAM_DEFAULTS_SYMBOL);
        return -1;
    }
    if (strnlen(text, PROTO_MAX_PARAMS_BYTES + 1) > PROTO_MAX_PARAMS_BYTES) {
        snprintf(err, errlen, "plugin %s: %s is longer than %u bytes", plugin,
                 FITFARM_PLUGIN_PARAM_DEFAULTS_SYMBOL, PROTO_MAX_PARAMS_BYTES);
        return -1;
    }
    char why[256];
    if (proto_params_canonical(text, &e->param_defaults, why, sizeof why) != 0) {
        snprintf(err, errlen, "plugin %s: %s: %s", plugin, FITFARM_PLUGIN_PARAM_DEFAULTS_SYMBOL,
                 why);
        return -1;
    }
    return 0;
}

int worker_registry_load_file(worker_registry_t *self, const char *path, char *err,
                              size_t errlen)
{
    int rc = -1;
    void *dl = dlopen(path, RTLD_NOW | RTLD_LOCAL);
    if (!dl) {
        const char *why = dlerror();
        snprintf(err, errlen, "dlopen failed: %s", why ? why : "unknown error");
        goto cleanup;
    }
    dlerror();
    void *sym = dlsym(dl, FITFARM_PLUGIN_SYMBOL);
    if (!sym) {
        snprintf(err, errlen, "no symbol %s", FITFARM_PLUGIN_SYMBOL);
        goto cleanup;
    }
    const fitfarm_plugin_t *(*entry)(void);
    /* POSIX allows converting dlsym's object pointer to a function pointer. */
    memcpy(&entry, &sym, sizeof entry);
    const fitfarm_plugin_t *plugin = entry();
    if (worker_registry_check_descriptor(plugin, err, errlen) != 0)
        goto cleanup;
    const worker_plugin_t *dup = worker_registry_find(self, plugin->name);
    if (dup && strcmp(dup->plugin->version, plugin->version) != 0) {
        /* One version per name and worker (broker/catalog.h): a second
         * worker carries the other one. */
        snprintf(err, errlen,
                 "plugin %s version %s is not loaded: this worker already carries version %s "
                 "from %s, and a worker carries one version of each plugin (the first wins); "
                 "start another worker with --plugin-dir for version %s",
                 plugin->name, plugin->version, dup->plugin->version, dup->origin,
                 plugin->version);
        goto cleanup;
    }
    if (dup) {
        snprintf(err, errlen, "plugin %s is already loaded from %s; the first wins",
                 plugin->name, dup->origin);
        goto cleanup;
    }
    worker_plugin_t e = {.plugin = plugin, .dl = dl};
    if (s_seed_params(dl, plugin->name, &e, err, errlen) != 0 ||
        s_param_defaults(dl, plugin->name, &e, err, errlen) != 0)
        goto cleanup;
    e.origin = common_xstrdup(path);
    if (proto_digest_file(path, e.digest) != 0) {
        snprintf(err, errlen, "cannot read the file to digest it");
        free(e.origin);
        free(e.param_defaults);
        goto cleanup;
    }
    s_append(self, &e);
    s_log_loaded(&e);
    dl = NULL;
    rc = 0;
cleanup:
    if (dl)
        dlclose(dl);
    return rc;
}

static int s_cmp_names(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

int worker_registry_load_dir(worker_registry_t *self, const char *dir)
{
    DIR *d = opendir(dir);
    if (!d) {
        LOG_WARN("cannot read plugin directory %s: %s", dir, strerror(errno));
        return -1;
    }
    char **names = NULL;
    size_t n = 0, cap = 0;
    struct dirent *de;
    while ((de = readdir(d))) {
        size_t len = strlen(de->d_name);
        if (len <= 3 || strcmp(de->d_name + len - 3, ".so") != 0)
            continue;
        if (n == cap) {
            cap = cap ? cap * 2 : 32;
            names = common_xrealloc(names, cap, sizeof *names);
        }
        names[n++] = common_xstrdup(de->d_name);
    }
    closedir(d);
    /* Name order, so which duplicate wins does not depend on the file system. */
    if (n > 0)
        qsort(names, n, sizeof *names, s_cmp_names);
    int loaded = 0;
    for (size_t i = 0; i < n; i++) {
        size_t plen = strlen(dir) + strlen(names[i]) + 2;
        char *path = common_xmalloc(plen);
        snprintf(path, plen, "%s/%s", dir, names[i]);
        char err[512];
        if (worker_registry_count(self) >= PROTO_MAX_PLUGINS)
            LOG_WARN("skipping %s: already %u plugins, the most one worker reports", path,
                     PROTO_MAX_PLUGINS);
        else if (worker_registry_load_file(self, path, err, sizeof err) != 0)
            LOG_WARN("skipping %s: %s", path, err);
        else
            loaded++;
        free(path);
        free(names[i]);
    }
    free(names);
    return loaded;
}

int worker_registry_add_exec(worker_registry_t *self, const char *spec, char *err,
                             size_t errlen)
{
#ifdef FITFARM_HAVE_EXEC
    const fitfarm_plugin_t *plugin = NULL;
    if (worker_exec_plugin_new(spec, &plugin, err, errlen) != 0)
        return -1;
    if (worker_registry_check_descriptor(plugin, err, errlen) != 0) {
        worker_exec_plugin_destroy(&plugin);
        return -1;
    }
    const worker_plugin_t *dup = worker_registry_find(self, plugin->name);
    if (dup) {
        snprintf(err, errlen, "plugin %s is already loaded from %s", plugin->name, dup->origin);
        worker_exec_plugin_destroy(&plugin);
        return -1;
    }
    if (worker_registry_count(self) >= PROTO_MAX_PLUGINS) {
        snprintf(err, errlen, "already %u plugins, the most one worker reports",
                 PROTO_MAX_PLUGINS);
        worker_exec_plugin_destroy(&plugin);
        return -1;
    }
    worker_plugin_t e = {.plugin = plugin, .exec = 1};
    const uint8_t *digest = worker_exec_plugin_digest(plugin);
    if (digest)
        memcpy(e.digest, digest, PROTO_DIGEST_BYTES);
    size_t olen = strlen(plugin->name) + 6;
    e.origin = common_xmalloc(olen);
    snprintf(e.origin, olen, "exec:%s", plugin->name);
    s_append(self, &e);
    s_log_loaded(&e);
    return 0;
#else
    (void)self;
    snprintf(err, errlen, "this worker was built without the exec plugin (cannot run \"%.64s\")",
             spec);
    return -1;
#endif
}

size_t worker_registry_count(const worker_registry_t *self)
{
    return self->count;
}

const worker_plugin_t *worker_registry_at(const worker_registry_t *self, size_t i)
{
    return i < self->count ? &self->plugins[i] : NULL;
}

const worker_plugin_t *worker_registry_find(const worker_registry_t *self, const char *name)
{
    for (size_t i = 0; i < self->count; i++)
        if (strcmp(self->plugins[i].plugin->name, name) == 0)
            return &self->plugins[i];
    return NULL;
}

void worker_registry_names(const worker_registry_t *self, char *out, size_t outlen)
{
    size_t used = 0;
    if (outlen)
        out[0] = '\0';
    for (size_t i = 0; i < self->count && used + 1 < outlen; i++) {
        int w = snprintf(out + used, outlen - used, "%s%s", i ? ", " : "",
                         self->plugins[i].plugin->name);
        if (w < 0)
            break;
        used += (size_t)w;
    }
    if (self->count == 0 && outlen)
        snprintf(out, outlen, "none");
}

size_t worker_default_plugin_dirs(const char **dirs, size_t max)
{
    size_t n = 0;
    if (max == 0)
        return 0;
    /* The build tree's plugins come first for an uninstalled binary, so tests
     * and developers never pick up an older installed build by accident. */
    char exe[4096];
    ssize_t len = readlink("/proc/self/exe", exe, sizeof exe - 1);
    const char *root = FITFARM_BUILD_ROOT;
    size_t rlen = strlen(root);
    if (len > 0) {
        exe[len] = '\0';
        if (strncmp(exe, root, rlen) == 0 && exe[rlen] == '/' && n + 1 < max)
            dirs[n++] = FITFARM_PLUGIN_BUILD_DIR;
    }
    /* An install under another prefix than the configured one (cmake
     * --install --prefix, a relocated package): the plugins sit at a fixed
     * place relative to this executable's folder. */
    static char beside[4096 + 64];
    if (len > 0 && n + 1 < max) {
        char *slash = strrchr(exe, '/');
        if (slash) {
            *slash = '\0';
            if (snprintf(beside, sizeof beside, "%s/%s", exe, FITFARM_BIN_TO_PLUGINS) <
                (int)sizeof beside)
                dirs[n++] = beside;
        }
    }
    if (n + 1 < max)
        dirs[n++] = FITFARM_PLUGIN_INSTALL_DIR;
    dirs[n] = NULL;
    return n;
}
