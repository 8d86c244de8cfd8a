/* cmd_allow.c: `fitfarm allow client|worker NAME.public --keys DIR [--label
 * TEXT]`: admits a public key to the broker's clients.allow or workers.allow
 * (common/allowlist.h has the format) by appending one line, after checking
 * that the key file and the existing list parse. Not here: removing keys (edit
 * the list and send the broker SIGHUP) or loading lists (the broker). */
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
#include "common/allowlist.h"
#include "common/keyfile.h"

static const char s_help[] =
    "usage: fitfarm allow client|worker NAME.public --keys DIR [--label TEXT]\n"
    "\n"
    "Admits a public key (from fitfarm keygen) to the broker's allow-list for one\n"
    "role: DIR/clients.allow (may submit work and read results) or\n"
    "DIR/workers.allow (may take jobs). A key is admitted only on its role's\n"
    "endpoint. The label (default: NAME) is shown in the broker's log.\n"
    "The running broker applies the change on SIGHUP (kill -HUP PID). To remove a\n"
    "key, delete its line from the list and send SIGHUP: the broker then drops that\n"
    "key's messages and re-queues a removed worker's jobs.\n"
    "\n"
    "exit status: 0 admitted (or already on the list), 1 not (the reason is\n"
    "printed), 2 usage error.\n";

static int s_usage(const char *msg, const char *arg)
{
    fprintf(stderr, "fitfarm allow: ");
    fprintf(stderr, msg, arg ? arg : "");
    fprintf(stderr, " (see fitfarm allow --help)\n");
    return 2;
}

int cli_cmd_allow(int argc, char **argv)
{
    const char *role = NULL, *file = NULL, *dir = NULL, *label = NULL;
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
        if (cli_match_value(argc, argv, &i, "--label", &v)) {
            if (!v)
                return s_usage("--label needs text%s", NULL);
            label = v;
            continue;
        }
        if (argv[i][0] == '-')
            return s_usage("unknown option %s", argv[i]);
        if (!role)
            role = argv[i];
        else if (!file)
            file = argv[i];
        else
            return s_usage("unexpected argument '%s'", argv[i]);
    }
    if (!role || (strcmp(role, "client") != 0 && strcmp(role, "worker") != 0))
        return s_usage("the first argument is the role: client or worker%s", NULL);
    if (!file)
        return s_usage("a public key file is required, e.g. lab-pc.public%s", NULL);
    if (!dir)
        return s_usage("--keys DIR is required (the broker's key folder)%s", NULL);

    char err[1024];
    uint8_t key[COMMON_KEY_BYTES];
    if (common_keyfile_read_public(file, key, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm allow: %s\n", err);
        return 1;
    }
    char deflabel[COMMON_ALLOW_LABEL_MAX + 1];
    if (!label) {
        const char *base = strrchr(file, '/');
        base = base ? base + 1 : file;
        snprintf(deflabel, sizeof deflabel, "%s", base);
        char *dot = strstr(deflabel, ".public");
        if (dot && dot[7] == '\0')
            *dot = '\0';
        label = deflabel;
    }
    if (common_allowlist_label_ok(label) != 0 || strchr(label, '\t')) {
        fprintf(stderr, "fitfarm allow: the label must be at most %d printable bytes\n",
                COMMON_ALLOW_LABEL_MAX);
        return 1;
    }
    struct stat st;
    if (stat(dir, &st) != 0 && mkdir(dir, 0755) != 0) {
        fprintf(stderr, "fitfarm allow: cannot create folder %s: %s\n", dir, strerror(errno));
        return 1;
    }
    int workers = strcmp(role, "worker") == 0;
    char path[4200], other[4200];
    snprintf(path, sizeof path, "%s/%s", dir, workers ? "workers.allow" : "clients.allow");
    snprintf(other, sizeof other, "%s/%s", dir, workers ? "clients.allow" : "workers.allow");
    common_allowlist_t *list = NULL, *olist = NULL;
    if (common_allowlist_read(path, 1, &list, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm allow: %s; fix it by hand first\n", err);
        return 1;
    }
    char fp[COMMON_KEY_FINGERPRINT];
    common_key_fingerprint(key, fp);
    int found = common_allowlist_find(list, key) != NULL;
    common_allowlist_destroy(&list);
    if (found) {
        printf("key %s is already on %s\n", fp, path);
        return 0;
    }
    if (common_allowlist_read(other, 1, &olist, err, sizeof err) == 0 &&
        common_allowlist_find(olist, key))
        fprintf(stderr, "fitfarm allow: note: key %s is also on %s; one key in two roles "
                        "works, but a separate key per role limits what a stolen one can do\n",
                fp, other);
    common_allowlist_destroy(&olist);

    char header[160];
    snprintf(header, sizeof header,
             "# fitfarm %s allow-list: one Z85 public key per line, then an optional label",
             workers ? "workers" : "clients");
    if (cli_keylist_append("fitfarm allow", path, header, key, label) != 0)
        return 1;
    printf("admitted %s key %s (%s) in %s; send the broker SIGHUP to apply\n", role, fp, label,
           path);
    return 0;
}
