/* version.h: plugin versions, the version constraint of a plugin reference
 * ("name" or "name@constraint", as a SUBMIT or `--plugin` gives it), and the
 * order of versions used to pick the highest match.
 *
 * Order (proto_version_cmp): the comparison Debian uses for the upstream part
 * of a package version (Debian Policy Manual, section 5.6.12 "Version", and
 * dpkg's verrevcmp; common practice for dotted versions): the strings are
 * read left to right as alternating runs of non-digits and digits. Runs of
 * non-digits are compared character by character, letters before everything
 * else, '~' before anything including the end of the run ("1.0~rc1" sorts
 * before "1.0"); runs of digits are compared as numbers of any length, an
 * empty run counting as 0 ("1.10" after "1.9", "1.02" equal to "1.2" in
 * order). So numeric components compare as numbers and others as strings.
 *
 * Match (proto_version_matches): constraint C matches version V when V is C,
 * or V starts with C followed by '.': "1" matches 1, 1.2 and 1.2.3, not 10 or
 * 1a; "1.2.3" matches only itself. Comparison is bytewise here, not by order.
 *
 * Pure code: no allocation. Not here: which versions the pool knows
 * (broker/catalog.h). */
#ifndef PROTO_VERSION_H
#define PROTO_VERSION_H

#include <stddef.h>

/* <0, 0 or >0 as a sorts before, with, or after b (above). Two different
 * strings may compare 0 ("1.02" and "1.2"); callers that need one winner
 * break the tie themselves. */
int proto_version_cmp(const char *a, const char *b);

/* 1 when constraint matches version (above), else 0. */
int proto_version_matches(const char *version, const char *constraint);

/* Splits a plugin reference "name" or "name@constraint". name (size bytes,
 * at least PROTO_MAX_NAME_BYTES + 1) gets the name; *constraint points into
 * ref after the '@', or is NULL without one. The name must be 1 to
 * PROTO_MAX_NAME_BYTES - 1 characters of [a-z0-9_-] (as workers require,
 * worker/registry.c); the constraint 1 to PROTO_MAX_NAME_BYTES - 1 printable,
 * non-blank ASCII characters (as plugin versions are). Returns 0, or -1 with
 * a sentence naming what was wrong in err. */
int proto_plugin_ref_split(const char *ref, char *name, size_t size, const char **constraint,
                           char *err, size_t errlen);

#endif
