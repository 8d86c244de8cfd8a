/* registry.h: the plugins this worker carries. Internal to the worker.
 *
 * Owns finding plugin shared objects in directories, loading and validating
 * them, registering exec (external program) plugins, their build digests, and
 * the lookup by name used by the child processes. Does not own evaluation
 * (child.c) or what the broker is told (loop.c builds HELLO from this list).
 * Built once before the child pool forks; read-only afterwards, so children
 * share it through fork without locking. */
#ifndef WORKER_REGISTRY_H
#define WORKER_REGISTRY_H

#include <stddef.h>
#include <stdint.h>

#include "fitfarm_plugin.h"
#include "limits.h"

typedef struct {
    const fitfarm_plugin_t *plugin; /* borrowed from the shared object or the exec module */
    uint8_t digest[PROTO_DIGEST_BYTES];
    char *origin; /* the file it came from, or "exec:NAME" */
    void *dl;     /* dlopen handle; NULL for an exec plugin */
    int exec;     /* nonzero: release with worker_exec_plugin_destroy */
    /* fitfarm_plugin_seed_params, checked; borrowed from the shared object.
     * NULL and 0 when the plugin exports none. */
    const char *const *seed_params;
    uint32_t n_seed_params;
    /* fitfarm_plugin_param_defaults in canonical form (owned), or NULL when
     * the plugin declares none. */
    char *param_defaults;
} worker_plugin_t;

typedef struct worker_registry worker_registry_t;

/* An empty registry; caller destroys it. Aborts on out of memory. */
worker_registry_t *worker_registry_new(void);

/* Unloads every plugin (no context of any may be live) and frees the
 * registry; sets *self_p to NULL. Accepts NULL. */
void worker_registry_destroy(worker_registry_t **self_p);

/* Loads every "*.so" in dir, in name order. A file that fails to load or
 * validate is skipped with a warning; a name already registered is skipped
 * with a warning (the first wins). Logs one line per plugin loaded. Returns
 * the number loaded, or -1 if dir cannot be read (logged). */
int worker_registry_load_dir(worker_registry_t *self, const char *dir);

/* Loads one shared object. Returns 0, or -1 with a sentence in err. */
int worker_registry_load_file(worker_registry_t *self, const char *path, char *err,
                              size_t errlen);

/* Registers an external program from a "NAME=COMMAND" entry (blocks while the
 * program introduces itself). Returns 0, or -1 with a sentence in err (also
 * when this build has no exec plugin). */
int worker_registry_add_exec(worker_registry_t *self, const char *spec, char *err,
                             size_t errlen);

size_t worker_registry_count(const worker_registry_t *self);

/* The i-th plugin (i < count), borrowed, valid until destroy. */
const worker_plugin_t *worker_registry_at(const worker_registry_t *self, size_t i);

/* The plugin called name, or NULL. Borrowed, valid until destroy. */
const worker_plugin_t *worker_registry_find(const worker_registry_t *self, const char *name);

/* Writes "a, b, c" (the plugin names) into out; for error messages. */
void worker_registry_names(const worker_registry_t *self, char *out, size_t outlen);

/* Checks a descriptor as the worker needs it: ABI version, name syntax,
 * version text, objective count, functions present. Returns 0, or -1 with a
 * sentence in err. */
int worker_registry_check_descriptor(const fitfarm_plugin_t *p, char *err, size_t errlen);

#endif
