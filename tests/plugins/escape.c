/* escape.c: a test-only plugin "escape" that tries to outlive its evaluation
 * or flood the worker's log, so tests can check the worker's sandbox
 * (reaper.h, output.h) through the real ABI.
 *
 * Params {"pidfile": PATH} (required): every process it leaves behind appends
 * its process id and a newline to PATH before the evaluation returns. The
 * genome's first double x0 selects the behaviour:
 *   0 fork a helper that ignores SIGTERM and sleeps (it stays in the group), ok
 *   1 double fork: the helper's parent exits, the helper calls setsid(), ok
 *   2 as 0, then hang forever (the time-out must kill both)
 *   3 fork a helper that calls setsid() (its parent lives), then hang forever
 *   4 print x1 MiB of text to stdout and x1 MiB to stderr, ok
 * Fitness [x0]. Not for installation: built into test-plugins/. */
#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include "bench_params.h"

typedef struct {
    char pidfile[512];
} escape_ctx_t;

static int s_create(const char *params_json, void **ctx, fitfarm_plugin_info_t *info, char *err,
                    size_t errlen)
{
    static const char *const allowed[] = {"pidfile", NULL};
    json_t *root = bench_params_open("escape", params_json, allowed, err, errlen);
    if (!root)
        return FITFARM_PLUGIN_EINVAL;
    const char *path = json_string_value(json_object_get(root, "pidfile"));
    if (!path || !*path || strlen(path) >= sizeof((escape_ctx_t *)0)->pidfile) {
        bench_errf(err, errlen, "escape: params need \"pidfile\", a path under 512 bytes");
        json_decref(root);
        return FITFARM_PLUGIN_EINVAL;
    }
    escape_ctx_t *self = calloc(1, sizeof *self);
    if (!self) {
        json_decref(root);
        return FITFARM_PLUGIN_EFAIL;
    }
    memcpy(self->pidfile, path, strlen(path) + 1);
    json_decref(root);
    info->objectives = 1;
    *ctx = self;
    return FITFARM_PLUGIN_OK;
}

/* In the helper: ignore SIGTERM, record our id, tell the waiting parent
 * (one byte on ready), then sleep until killed. Never returns. */
static void s_helper(const escape_ctx_t *self, int ready, int leave_session)
{
    if (leave_session)
        (void)setsid();
    signal(SIGTERM, SIG_IGN);
    signal(SIGHUP, SIG_IGN);
    int fd = open(self->pidfile, O_WRONLY | O_APPEND | O_CREAT | O_CLOEXEC, 0600);
    if (fd >= 0) {
        dprintf(fd, "%ld\n", (long)getpid());
        close(fd);
    }
    char one = 1;
    ssize_t w = write(ready, &one, 1);
    (void)w;
    close(ready);
    for (;;)
        pause();
}

/* Starts a helper (through an intermediate that exits when double is set)
 * and waits until it has recorded itself. Returns 0 or -1. */
static int s_leave_helper(const escape_ctx_t *self, int twice, int leave_session)
{
    int p[2];
    if (pipe(p) != 0)
        return -1;
    pid_t pid = fork();
    if (pid < 0)
        return -1;
    if (pid == 0) {
        close(p[0]);
        if (twice) {
            pid_t g = fork();
            if (g == 0)
                s_helper(self, p[1], leave_session);
            _exit(0);
        }
        s_helper(self, p[1], leave_session);
    }
    close(p[1]);
    char one = 0;
    ssize_t r;
    while ((r = read(p[0], &one, 1)) < 0 && errno == EINTR)
        ;
    close(p[0]);
    if (twice)
        while (waitpid(pid, NULL, 0) < 0 && errno == EINTR)
            ;
    return r == 1 ? 0 : -1;
}

static void s_print(FILE *to, long long mib)
{
    char line[1024];
    memset(line, 'x', sizeof line - 1);
    line[sizeof line - 1] = '\n';
    for (long long i = 0; i < mib * 1024; i++)
        fwrite(line, 1, sizeof line, to);
    fflush(to);
}

static int s_evaluate(void *ctx, const uint8_t *genome, size_t genome_len, uint64_t seed,
                      double *fitness, char *err, size_t errlen)
{
    (void)seed;
    const escape_ctx_t *self = ctx;
    if (genome_len < 8) {
        bench_errf(err, errlen, "escape: genome needs at least one double");
        return FITFARM_PLUGIN_EINVAL;
    }
    double x0 = fitfarm_genome_f64(genome, 0);
    int rc = 0;
    switch ((int)x0) {
    case 0:
    case 2:
        rc = s_leave_helper(self, 0, 0);
        break;
    case 1:
        rc = s_leave_helper(self, 1, 1);
        break;
    case 3:
        rc = s_leave_helper(self, 0, 1);
        break;
    case 4: {
        double mib = genome_len >= 16 ? fitfarm_genome_f64(genome, 1) : 1.0;
        if (!(mib >= 0 && mib <= 1024)) {
            bench_errf(err, errlen, "escape: x1 (MiB to print) must be in [0, 1024]");
            return FITFARM_PLUGIN_EINVAL;
        }
        s_print(stdout, (long long)mib);
        s_print(stderr, (long long)mib);
        break;
    }
    default:
        bench_errf(err, errlen, "escape: unknown behaviour %g", x0);
        return FITFARM_PLUGIN_EINVAL;
    }
    if (rc != 0) {
        bench_errf(err, errlen, "escape: could not start the helper: %s", strerror(errno));
        return FITFARM_PLUGIN_EFAIL;
    }
    if ((int)x0 == 2 || (int)x0 == 3)
        for (;;)
            pause();
    fitness[0] = x0;
    return FITFARM_PLUGIN_OK;
}

static void s_destroy(void *ctx)
{
    free(ctx);
}

static const fitfarm_plugin_t s_plugin = {
    .abi_version = FITFARM_PLUGIN_ABI,
    .name = "escape",
    .version = "1.0.0",
    .objectives = 1,
    .flags = 0,
    .create = s_create,
    .evaluate = s_evaluate,
    .destroy = s_destroy,
};

FITFARM_PLUGIN_EXPORT const fitfarm_plugin_t *fitfarm_plugin(void)
{
    return &s_plugin;
}
