/* programs.c: the search for the daemons' programs (see programs.h). Owns the
 * order of the places and the sentence that lists them when both programs are
 * in none. The build-tree and install paths are compiled in by CMake:
 * FITFARM_BUILD_ROOT, FITFARM_BROKER_BUILD_DIR, FITFARM_WORKER_BUILD_DIR,
 * FITFARM_LIB_TO_BIN (bindir relative to libdir) and FITFARM_INSTALL_BINDIR.
 *
 * Why "beside the library" comes before the build tree and the configured
 * bindir: an install under another prefix (cmake --install --prefix, a
 * relocated package) must start its own programs, not an older build's. */
#include "programs.h"

#include <dlfcn.h>
#include <limits.h>
#include <link.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "client/include/fitfarm.h"

#define S_BROKER "fitfarm-broker"
#define S_WORKER "fitfarm-worker"
#define S_MAX_PLACES 5

typedef struct {
    char broker_dir[CLIENT_PATH_MAX];
    char worker_dir[CLIENT_PATH_MAX];
    const char *why; /* how this place was chosen, for the error sentence */
} s_place_t;

/* The file holding this code: the shared library, or the program the static
 * library is linked into. Returns 0 and an absolute path, or -1. */
static int s_self_path(char *out, size_t len)
{
    Dl_info info;
    struct link_map *map = NULL;
    char buf[CLIENT_PATH_MAX];
    if (dladdr1((void *)&client_programs_find, &info, (void **)&map, RTLD_DL_LINKMAP) != 0 &&
        map && map->l_name && map->l_name[0]) {
        if (!realpath(map->l_name, buf))
            return -1;
    } else {
        /* The main program's link map has an empty name (dladdr would give
         * argv[0], which may be relative to a folder we are no longer in). */
        ssize_t n = readlink("/proc/self/exe", buf, sizeof buf - 1);
        if (n <= 0)
            return -1;
        buf[n] = '\0';
    }
    if (strlen(buf) >= len)
        return -1;
    snprintf(out, len, "%s", buf);
    return 0;
}

static int s_executable(const char *dir, const char *name, char *path, size_t len)
{
    if (snprintf(path, len, "%s/%s", dir, name) >= (int)len)
        return 0;
    return access(path, X_OK) == 0;
}

static void s_add(s_place_t *places, size_t *n, const char *broker_dir, const char *worker_dir,
                  const char *why)
{
    if (*n >= S_MAX_PLACES || !broker_dir || !*broker_dir)
        return;
    s_place_t *p = &places[(*n)++];
    snprintf(p->broker_dir, sizeof p->broker_dir, "%s", broker_dir);
    snprintf(p->worker_dir, sizeof p->worker_dir, "%s", worker_dir);
    p->why = why;
}

int client_programs_find(const char *programs_dir, char *broker, size_t broker_len, char *worker,
                         size_t worker_len, char *err, size_t errlen)
{
    s_place_t places[S_MAX_PLACES];
    size_t n = 0;
    s_add(places, &n, programs_dir, programs_dir, "programs_dir");
    const char *env = getenv("FITFARM_PROGRAMS_DIR");
    s_add(places, &n, env, env, "FITFARM_PROGRAMS_DIR");
    char self[CLIENT_PATH_MAX];
    if (s_self_path(self, sizeof self) == 0) {
        char beside[CLIENT_PATH_MAX];
        char *slash = strrchr(self, '/');
        *slash = '\0';
        if (snprintf(beside, sizeof beside, "%s/%s", self, FITFARM_LIB_TO_BIN) <
            (int)sizeof beside)
            s_add(places, &n, beside, beside, "beside the library");
        *slash = '/';
        /* Compiled-in build folders only for a library that is itself in that
         * build tree: an installed copy must not start a developer's build. */
        size_t rlen = strlen(FITFARM_BUILD_ROOT);
        if (strncmp(self, FITFARM_BUILD_ROOT, rlen) == 0 && self[rlen] == '/')
            s_add(places, &n, FITFARM_BROKER_BUILD_DIR, FITFARM_WORKER_BUILD_DIR, "build tree");
    }
    s_add(places, &n, FITFARM_INSTALL_BINDIR, FITFARM_INSTALL_BINDIR, "install bindir");

    for (size_t i = 0; i < n; i++) {
        if (s_executable(places[i].broker_dir, S_BROKER, broker, broker_len) &&
            s_executable(places[i].worker_dir, S_WORKER, worker, worker_len))
            return FITFARM_OK;
    }
    int used = snprintf(err, errlen,
                        "the embedded pool needs the " S_BROKER " and " S_WORKER
                        " programs and found them in none of:");
    for (size_t i = 0; i < n && used >= 0 && (size_t)used < errlen; i++) {
        if (strcmp(places[i].broker_dir, places[i].worker_dir) == 0)
            used += snprintf(err + used, errlen - (size_t)used, " %s (%s);",
                             places[i].broker_dir, places[i].why);
        else
            used += snprintf(err + used, errlen - (size_t)used, " %s and %s (%s);",
                             places[i].broker_dir, places[i].worker_dir, places[i].why);
    }
    if (used >= 0 && (size_t)used < errlen)
        snprintf(err + used, errlen - (size_t)used,
                 " set fitfarm_options_t.programs_dir or the environment variable FITFARM_PROGRAMS_DIR to the "
                 "folder that holds both");
    return FITFARM_ESYSTEM;
}
