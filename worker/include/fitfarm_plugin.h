/* fitfarm_plugin.h: the plugin ABI. Public and stable; nothing else under
 * worker/ is API.
 *
 * A plugin is a shared object exporting one symbol,
 *
 *     const fitfarm_plugin_t *fitfarm_plugin(void);
 *
 * (use FITFARM_PLUGIN_EXPORT), returning a constant descriptor. The worker
 * dlopens every plugin in its plugin directories, checks abi_version, and
 * reports name, version, objectives, flags and the file's BLAKE2b digest to the
 * broker. Evaluations run in the worker's child processes, one at a time per
 * child: a plugin needs no thread safety, and a crash costs only the child.
 *
 * Determinism: a plugin draws randomness only from the seed it is given,
 * through fitfarm_rng.h, and is built with -ffp-contract=off and without
 * fast-math, so one build gives the same bits on every x86-64 node. A plugin
 * whose results do not depend on the seed sets FITFARM_PLUGIN_DETERMINISTIC:
 * then all replicates and runs share one cached result. One whose results do
 * not depend on the seed for some params only lists the params that switch
 * the randomness off (fitfarm_plugin_seed_params, at the end).
 *
 * Genomes arrive as bytes. Genomes submitted as vectors of doubles are
 * little-endian IEEE 754 binary64; fitfarm_genome_f64() reads them. */
#ifndef FITFARM_PLUGIN_H
#define FITFARM_PLUGIN_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "fitfarm_rng.h"

#define FITFARM_PLUGIN_ABI 1

/* Descriptor flags. */
#define FITFARM_PLUGIN_DETERMINISTIC 0x1u

/* Return codes of create and evaluate. */
#define FITFARM_PLUGIN_OK 0
#define FITFARM_PLUGIN_EINVAL 1 /* the request is bad: wrong genome length, bad params */
#define FITFARM_PLUGIN_EFAIL 2  /* the evaluation failed */

/* What a context reports about itself once params are known. */
typedef struct {
    uint32_t objectives;   /* length of the fitness vector evaluate writes */
    uint32_t genome_bytes; /* expected genome size in bytes; 0 = any */
} fitfarm_plugin_info_t;

typedef struct fitfarm_plugin {
    uint32_t abi_version; /* FITFARM_PLUGIN_ABI */
    const char *name;     /* [a-z0-9_-]+, unique in a pool */
    const char *version;  /* changes whenever results may change */
    uint32_t objectives;  /* default number of objectives */
    uint32_t flags;       /* FITFARM_PLUGIN_* */

    /* Creates a context from canonical params JSON (never NULL; "{}" when
     * none). Fills info. On error returns FITFARM_PLUGIN_EINVAL and writes a
     * sentence into err (errlen bytes, NUL-terminated). *ctx is owned by the
     * worker and released with destroy. */
    int (*create)(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                  size_t errlen);

    /* Evaluates one genome with the given seed, writing info.objectives
     * doubles into fitness. Returns FITFARM_PLUGIN_OK, or EINVAL / EFAIL with a
     * sentence in err. Must not keep pointers to genome or fitness. */
    int (*evaluate)(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                    double *fitness, char *err, size_t errlen);

    /* Releases a context. Accepts NULL. */
    void (*destroy)(void *ctx);
} fitfarm_plugin_t;

#define FITFARM_PLUGIN_SYMBOL "fitfarm_plugin"
#define FITFARM_PLUGIN_EXPORT __attribute__((visibility("default")))

/* Reads the i-th little-endian double of a genome. The caller checks bounds. */
static inline double fitfarm_genome_f64(const uint8_t *genome, size_t i)
{
    uint64_t bits = 0;
    for (int b = 7; b >= 0; b--)
        bits = (bits << 8) | genome[i * 8 + (size_t)b];
    double v;
    memcpy(&v, &bits, sizeof v);
    return v;
}

/* Optional: a plugin may also export
 *
 *     int fitfarm_plugin_trace(const char *params_json, const uint8_t *genome,
 *                              size_t genome_len, uint64_t seed, const char *path,
 *                              char *err, size_t errlen);
 *
 * which runs one evaluation exactly as create + evaluate would (same params,
 * genome and seed, same fitness) and writes its time series to the file at
 * path, in a format the plugin documents (JSON Lines for the bundled ones).
 * Returns FITFARM_PLUGIN_OK, or EINVAL / EFAIL with a sentence in err. Used by
 * `fitfarm sim --trace`; the worker never calls it. */
typedef int (*fitfarm_plugin_trace_fn)(const char *params_json, const uint8_t *genome,
                                       size_t genome_len, uint64_t seed, const char *path,
                                       char *err, size_t errlen);
#define FITFARM_PLUGIN_TRACE_SYMBOL "fitfarm_plugin_trace"

/* Optional: a stochastic plugin may also export
 *
 *     static const char *const s_seed_params[] = {"scatter_radius", "jitter", NULL};
 *     FITFARM_PLUGIN_EXPORT const char *const *fitfarm_plugin_seed_params = s_seed_params;
 *
 * a pointer to a NULL-terminated list of parameter names (the declaration
 * below makes the compiler check the type). A stochastic plugin whose
 * results do not depend on the seed when every listed parameter is present in
 * params with the number 0 (integer or real) lists them here; the broker then
 * keys such requests without the seed, so all replicates and runs share one
 * cached result, exactly as for a FITFARM_PLUGIN_DETERMINISTIC plugin. The
 * seed is still passed to evaluate (the plugin ignores it) and reported with
 * the result. At most 16 names, each 1 to 64 characters of [a-z0-9_]; a
 * plugin exporting a longer list or another name is refused by the worker.
 * A parameter absent from params counts as not zero, even if its default is
 * 0, unless the plugin declares its defaults (fitfarm_plugin_param_defaults,
 * below). Read once when the worker loads the plugin. */
extern FITFARM_PLUGIN_EXPORT const char *const *fitfarm_plugin_seed_params;
#define FITFARM_PLUGIN_SEED_PARAMS_SYMBOL "fitfarm_plugin_seed_params"
#define FITFARM_PLUGIN_MAX_SEED_PARAMS 16
#define FITFARM_PLUGIN_MAX_SEED_PARAM_CHARS 64

/* Optional: any plugin may export the defaults of the parameters it reads,
 *
 *     FITFARM_PLUGIN_EXPORT const char *fitfarm_plugin_param_defaults = "{\"n\": 30}";
 *
 * a JSON object naming every parameter with the value the plugin uses when
 * it is left out. The broker then keys a request by the params the plugin
 * will compute with: a parameter left out takes its default, and a number is
 * written as the type of its default (30.0 becomes 30 for an integer
 * default, 2 becomes 2.0 for a real one, when exact), so {} and the explicit
 * defaults, or 10 and 10.0, are one evaluation and one cached result. The
 * plugin's create() then receives the completed params. Declare only what
 * create() really does: a default listed here but different in create()
 * would key two meanings as one. With defaults declared, a seed param left
 * out counts as its default (so a default of 0 makes the request seed-free).
 * A JSON object of at most 64 KiB; anything else refuses the plugin. Read
 * once when the worker loads the plugin. */
extern FITFARM_PLUGIN_EXPORT const char *fitfarm_plugin_param_defaults;
#define FITFARM_PLUGIN_PARAM_DEFAULTS_SYMBOL "fitfarm_plugin_param_defaults"

/* Optional: any plugin may name its objectives and their units,
 *
 *     static const fitfarm_plugin_objective_t s_objectives[] = {
 *         {"transmissibility", "dB"}, {"settlement", "mm"}, {NULL, NULL}};
 *     FITFARM_PLUGIN_EXPORT const fitfarm_plugin_objective_t *fitfarm_plugin_objective_names =
 *         s_objectives;
 *
 * a pointer to an array ended by an entry whose name is NULL. Entry i names
 * fitness[i]; a plugin whose number of objectives depends on params lists as
 * many as it can report, and an objective past the list's end is called
 * f<i+1>. unit may be NULL or "" for a pure number. Names are 1 to 48 bytes,
 * units at most 16 bytes, both printable UTF-8 (no control characters), at
 * most 64 entries; the fitness stays a cost to minimise whatever its name.
 * Read only by the command-line tool, where it draws pictures (`fitfarm
 * front --plugin NAME`, `fitfarm show`): the worker, the broker and the
 * wire never see it, so declaring it changes no key and no result, and a
 * plugin without it works exactly as before. A list breaking these rules is
 * refused by the tool with the reason. */
typedef struct {
    const char *name; /* e.g. "settlement" */
    const char *unit; /* e.g. "mm"; NULL or "" for none */
} fitfarm_plugin_objective_t;
extern FITFARM_PLUGIN_EXPORT const fitfarm_plugin_objective_t *fitfarm_plugin_objective_names;
#define FITFARM_PLUGIN_OBJECTIVE_NAMES_SYMBOL "fitfarm_plugin_objective_names"
#define FITFARM_PLUGIN_MAX_OBJECTIVE_NAMES 64
#define FITFARM_PLUGIN_MAX_OBJECTIVE_NAME_BYTES 48
#define FITFARM_PLUGIN_MAX_OBJECTIVE_UNIT_BYTES 16

#endif
