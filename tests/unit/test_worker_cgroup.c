/* test_worker_cgroup.c: worker/cgroup.h on this machine. A child enters a
 * slot's cgroup, forks a grandchild that calls setsid() (out of every
 * process group and session of ours) and waits; killing the slot kills
 * both; closing removes the folder. Where the machine offers no usable
 * cgroup v2 the open must say why, and the rest is skipped (cmocka's skip).
 * Paths and files: the kernel's Documentation/admin-guide/cgroup-v2.rst. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <errno.h>
#include <signal.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <cmocka.h>

#include "worker/cgroup.h"

static int s_alive(pid_t pid)
{
    char path[64], buf[512];
    snprintf(path, sizeof path, "/proc/%d/stat", (int)pid);
    FILE *f = fopen(path, "r");
    if (!f)
        return 0;
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = '\0';
    const char *close_paren = strrchr(buf, ')');
    return close_paren && close_paren[1] == ' ' && close_paren[2] != 'Z';
}

static void test_slot_kill_reaches_a_setsid_grandchild(void **state)
{
    (void)state;
    worker_cgroup_t cg;
    char why[512] = "";
    if (worker_cgroup_open(&cg, why, sizeof why) != 0) {
        assert_true(why[0] != '\0'); /* it says why */
        fprintf(stderr, "no usable cgroup v2 here: %s\n", why);
        skip();
    }
    int fd = worker_cgroup_slot_fd(&cg, 3);
    assert_true(fd >= 0);
    int pfd[2];
    assert_int_equal(pipe(pfd), 0);
    pid_t child = fork();
    assert_true(child >= 0);
    if (child == 0) {
        close(pfd[0]);
        if (worker_cgroup_enter(&cg, fd) != 0)
            _exit(2);
        pid_t g = fork();
        if (g == 0) {
            setsid();
            for (;;)
                pause();
        }
        (void)!write(pfd[1], &g, sizeof g);
        for (;;)
            pause();
    }
    close(fd);
    close(pfd[1]);
    pid_t grandchild = 0;
    assert_int_equal(read(pfd[0], &grandchild, sizeof grandchild), (ssize_t)sizeof grandchild);
    close(pfd[0]);
    assert_true(s_alive(grandchild));
    char procs[WORKER_CGROUP_PATH_MAX + 64];
    snprintf(procs, sizeof procs, "%s/slot-3/cgroup.procs", cg.dir);
    struct stat st;
    assert_int_equal(stat(procs, &st), 0);
    unsigned n = worker_cgroup_kill_slot(&cg, 3);
    assert_int_equal(n, 2); /* the child and its grandchild were listed */
    int status = 0;
    assert_int_equal(waitpid(child, &status, 0), child);
    assert_true(WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL);
    for (int i = 0; i < 200 && s_alive(grandchild); i++) {
        struct timespec ts = {0, 10000000L};
        nanosleep(&ts, NULL);
    }
    assert_false(s_alive(grandchild)); /* left our session, still killed */
    assert_int_equal(worker_cgroup_kill_slot(&cg, 3), 0); /* empty now */
    char dir[WORKER_CGROUP_PATH_MAX];
    snprintf(dir, sizeof dir, "%s", cg.dir);
    worker_cgroup_close(&cg);
    assert_int_equal(stat(dir, &st), -1);
    assert_int_equal(errno, ENOENT);
}

static pid_t s_dead_pid(void)
{
    pid_t p = fork();
    if (p == 0)
        _exit(0);
    waitpid(p, NULL, 0);
    return p; /* reaped: no such process now (reuse this soon is unlikely) */
}

/* A worker that died with its keeper (killed by name, say) leaves empty
 * folders; the next worker's open removes them, but never a folder that
 * still holds a process. */
static void test_stale_folders_removed(void **state)
{
    (void)state;
    worker_cgroup_t cg;
    char why[512] = "";
    if (worker_cgroup_open(&cg, why, sizeof why) != 0)
        skip();
    char parent[WORKER_CGROUP_PATH_MAX];
    snprintf(parent, sizeof parent, "%s", cg.dir);
    *strrchr(parent, '/') = '\0';
    worker_cgroup_close(&cg);
    char empty[WORKER_CGROUP_PATH_MAX + 64], busy[WORKER_CGROUP_PATH_MAX + 64];
    char sub[WORKER_CGROUP_PATH_MAX + 128];
    snprintf(empty, sizeof empty, "%s/fitfarm-worker-%d", parent, (int)s_dead_pid());
    snprintf(busy, sizeof busy, "%s/fitfarm-worker-%d", parent, (int)s_dead_pid());
    assert_int_equal(mkdir(empty, 0755), 0);
    snprintf(sub, sizeof sub, "%s/slot-0", empty);
    assert_int_equal(mkdir(sub, 0755), 0);
    assert_int_equal(mkdir(busy, 0755), 0);
    snprintf(sub, sizeof sub, "%s/slot-0", busy);
    assert_int_equal(mkdir(sub, 0755), 0);
    char procs[WORKER_CGROUP_PATH_MAX + 160];
    snprintf(procs, sizeof procs, "%s/cgroup.procs", sub);
    pid_t child = fork();
    if (child == 0) {
        FILE *f = fopen(procs, "w");
        if (!f || fputs("0", f) < 0 || fclose(f) != 0)
            _exit(2);
        for (;;)
            pause();
    }
    struct timespec ts = {0, 100000000L};
    nanosleep(&ts, NULL); /* it has moved itself in */
    assert_int_equal(worker_cgroup_open(&cg, why, sizeof why), 0);
    struct stat st;
    assert_int_equal(stat(empty, &st), -1); /* removed */
    assert_int_equal(stat(busy, &st), 0);   /* holds a process: kept */
    worker_cgroup_close(&cg);
    kill(child, SIGKILL);
    waitpid(child, NULL, 0);
    for (int i = 0; i < 100 && rmdir(sub) != 0; i++)
        nanosleep(&ts, NULL);
    assert_int_equal(rmdir(busy), 0);
}

/* Disabled (or never opened) cgroups do nothing and fail nothing. */
static void test_disabled_is_inert(void **state)
{
    (void)state;
    worker_cgroup_t cg = {.keeper_fd = -1};
    assert_int_equal(worker_cgroup_slot_fd(&cg, 0), -1);
    assert_int_equal(worker_cgroup_slot_fd(NULL, 0), -1);
    assert_int_equal(worker_cgroup_kill_slot(&cg, 0), 0);
    assert_int_equal(worker_cgroup_enter(NULL, -1), -1);
    worker_cgroup_close(&cg);
    worker_cgroup_close(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_slot_kill_reaches_a_setsid_grandchild),
        cmocka_unit_test(test_stale_folders_removed),
        cmocka_unit_test(test_disabled_is_inert),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
