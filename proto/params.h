/* params.h: plugin parameters as canonical JSON, and JSON number printing.
 *
 * Params are a JSON object. Canonical form: keys sorted, no spaces, numbers
 * printed so they round-trip (17 significant digits for reals), so that
 * {"n":30} and { "n" : 30 } have one key. Uses jansson. */
#ifndef PROTO_PARAMS_H
#define PROTO_PARAMS_H

#include <stddef.h>
#include <stdint.h>

/* Canonicalises text (NULL or "" means "{}"). On success returns 0 and *out
 * is a malloc'd NUL-terminated string the caller frees. On failure returns -1
 * and writes a sentence naming the problem into err (errlen bytes). Rejects
 * anything but an object, and anything longer than PROTO_MAX_PARAMS_BYTES. */
int proto_params_canonical(const char *text, char **out, char *err, size_t errlen);

/* 1 when n > 0 and the params object (canonical JSON, or any JSON object
 * text) holds every one of names[0..n) with a number equal to zero: integer
 * 0, or a real that compares equal to 0 (0.0 and -0.0). 0 otherwise: a name
 * absent, any other value (1e-300, the string "0", null, false), n == 0, or
 * text that is not a JSON object. This is how the broker decides that a
 * stochastic plugin's request does not depend on the seed (the plugin's
 * seed params, fitfarm_plugin.h). */
int proto_params_all_zero(const char *canonical_json, char *const *names, uint32_t n);

/* The params the plugin will compute with: canonical (canonical form) merged
 * with defaults (the plugin's declared defaults, a JSON object): a name left
 * out takes its default; a number given where the default is a number takes
 * the default's type when that is exact (an integral real within 2^53 for an
 * integer default, an integer within 2^53 for a real default); every other
 * value, and every name the defaults do not list, stays as given. On success
 * returns 0 and *out is the canonical result (caller frees). On failure
 * returns -1 with a sentence in err. So {} and the explicit defaults, or 10
 * and 10.0, give one content key (params_defaults.c). */
int proto_params_with_defaults(const char *canonical, const char *defaults, char **out,
                               char *err, size_t errlen);

/* Prints a double so that it parses back to the same bits: "%.17g", with
 * non-finite values as null (JSON has no NaN). Returns the length written
 * (always < 32); out must hold 32 bytes. */
int proto_format_double(double v, char out[32]);

#endif
