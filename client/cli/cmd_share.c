/* cmd_share.c: `fitfarm share RUN NAME.public --keys DIR`: lets one more
 * client key use a run (submit to it, receive and acknowledge its results) by
 * appending one line to the broker's run share list, DIR/runs.share
 * (common/sharelist.h has the format), after checking that the key file and
 * the existing list parse. The run keeps its owner. Not here: removing a share
 * (delete the line and send the broker SIGHUP) or what sharing grants (the
 * broker's access.c). */
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli_util.h"
#include "commands.h"
#include "keylist_append.h"
#include "common/keyfile.h"
#include "common/sharelist.h"

static const char s_help[] =
    "usage: fitfarm share RUN NAME.public --keys DIR\n"
    "\n"
    "A run belongs to the client key that created it; no other key can submit to\n"
    "it, receive or acknowledge its results, or see it in status. This command\n"
    "lets the client key in NAME.public use run RUN too, by adding a line to the\n"
    "broker's DIR/runs.share. The run keeps its owner; one connection at a time\n"
    "receives a run's results, and a SUBMIT of the run from a permitted key takes\n"
    "the stream over. The running broker applies the change on SIGHUP (kill -HUP\n"
    "PID). To stop sharing, delete the line and send SIGHUP: the key's connection\n"
    "to the run is cut off at once.\n"
    "\n"
    "exit status: 0 shared (or already shared), 1 not (the reason is printed),\n"
    "2 usage error.\n";

static int s_usage(const char *msg, const char *arg)
{
    fprintf(stderr, "fitfarm share: ");
    fprintf(stderr, msg, arg ? arg : "");
    fprintf(stderr, " (see fitfarm share --help)\n");
    return 2;
}

int cli_cmd_share(int argc, char **argv)
{
    const char *run = NULL, *file = NULL, *dir = NULL;
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_help, stdout);
            return 0;
        }
        if (cli_match_value(argc, argv, &i, "--keys", &v)) {
            if (!v || !*v)
                return s_usage("--keys needs the broker's key folder%s", NULL);
            dir = v;
            continue;
        }
        if (argv[i][0] == '-' && argv[i][1] == '-')
            return s_usage("unknown option %s", argv[i]);
        if (!run)
            run = argv[i];
        else if (!file)
            file = argv[i];
        else
            return s_usage("unexpected argument '%s'", argv[i]);
    }
    if (!run)
        return s_usage("the first argument is the run id%s", NULL);
    if (common_sharelist_run_ok(run) != 0)
        return s_usage("run id '%s' cannot be shared: it must be 1 to 128 bytes without "
                       "control characters or leading/trailing spaces", run);
    if (!file)
        return s_usage("a client public key file is required, e.g. colleague.public%s", NULL);
    if (!dir)
        return s_usage("--keys DIR is required (the broker's key folder)%s", NULL);

    char err[1024];
    uint8_t key[COMMON_KEY_BYTES];
    if (common_keyfile_read_public(file, key, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm share: %s\n", err);
        return 1;
    }
    struct stat st;
    if (stat(dir, &st) != 0 || !S_ISDIR(st.st_mode)) {
        fprintf(stderr, "fitfarm share: %s is not a folder (the broker's --keys folder)\n", dir);
        return 1;
    }
    char path[4200];
    snprintf(path, sizeof path, "%s/runs.share", dir);
    common_sharelist_t *list = NULL;
    if (common_sharelist_read(path, &list, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm share: %s; fix it by hand first\n", err);
        return 1;
    }
    char fp[COMMON_KEY_FINGERPRINT];
    common_key_fingerprint(key, fp);
    int found = common_sharelist_has(list, run, key);
    common_sharelist_destroy(&list);
    if (found) {
        printf("run %s is already shared with key %s in %s\n", run, fp, path);
        return 0;
    }
    if (cli_keylist_append("fitfarm share", path,
                           "# fitfarm run shares: a client public key (Z85), then the id of a "
                           "run it may use",
                           key, run) != 0)
        return 1;
    printf("shared run %s with key %s in %s; send the broker SIGHUP to apply\n", run, fp, path);
    return 0;
}
