/* programs.h: where the embedded pool finds the fitfarm-broker and
 * fitfarm-worker programs it starts. Internal to the client library (not API).
 *
 * Not here: starting them (pool.c). */
#ifndef CLIENT_PROGRAMS_H
#define CLIENT_PROGRAMS_H

#include <stddef.h>

/* Our bound on a file path (the C library's PATH_MAX sits behind a
 * <limits.h> that proto/limits.h shadows on our include path). */
#define CLIENT_PATH_MAX 4096

/* Looks for both programs, in order, in: programs_dir (the option; may be
 * NULL), $FITFARM_PROGRAMS_DIR, the install tree beside the library (the
 * bindir relative to the libdir the library sits in), the build tree the
 * library was built in (only when the library itself is in that build tree),
 * then the configured install bindir. The first place holding both wins.
 * Returns 0 and fills broker and worker (absolute or as given) on success;
 * otherwise FITFARM_ESYSTEM with a sentence in err naming every folder tried
 * and the option and variable that set the folder. */
int client_programs_find(const char *programs_dir, char *broker, size_t broker_len, char *worker,
                         size_t worker_len, char *err, size_t errlen);

#endif
