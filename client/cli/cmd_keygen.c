/* cmd_keygen.c: `fitfarm keygen NAME [--dir DIR]`: a new CURVE key pair in
 * NAME.public and NAME.secret (common/keyfile.h has the format). Refuses to
 * overwrite either file. Not here: allow-lists (cmd_allow.c). */
#include <errno.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "cli_util.h"
#include "commands.h"
#include "common/keyfile.h"

static const char s_help[] =
    "usage: fitfarm keygen NAME [--dir DIR]\n"
    "\n"
    "Makes a CURVE key pair for a broker, a worker or a client: DIR/NAME.public\n"
    "(give it to the other side) and DIR/NAME.secret (mode 0600; never copy it off\n"
    "this machine). Refuses to overwrite an existing key. DIR defaults to the\n"
    "current folder; it and any missing folder above it are created (mode 0700).\n"
    "\n"
    "Then, on the broker's machine:\n"
    "  fitfarm allow client NAME.public --keys KEYS    (a machine that submits)\n"
    "  fitfarm allow worker NAME.public --keys KEYS    (a machine that evaluates)\n"
    "and start the daemons with --key NAME.secret (and --broker-key broker.public).\n"
    "\n"
    "exit status: 0 written, 1 not written (the reason is printed), 2 usage error.\n";

/* Creates dir and every missing folder above it, each mode 0700 (a key
 * folder's parents are often made just for it, like ~/.fitfarm/keys).
 * Returns 0, or -1 with the folder that failed and why in err. */
static int s_make_dirs(const char *dir, char *err, size_t err_len)
{
    char path[4096];
    size_t n = strlen(dir);
    if (n >= sizeof path) {
        snprintf(err, err_len, "folder name too long (%zu bytes, at most %zu)", n,
                 sizeof path - 1);
        return -1;
    }
    memcpy(path, dir, n + 1);
    for (size_t i = 1; i <= n; i++) {
        if (path[i] != '/' && path[i] != '\0')
            continue;
        char c = path[i];
        path[i] = '\0';
        struct stat st;
        if (stat(path, &st) == 0) {
            if (!S_ISDIR(st.st_mode)) {
                snprintf(err, err_len, "cannot create folder %s: %s exists and is not a folder",
                         dir, path);
                return -1;
            }
        } else if (mkdir(path, 0700) != 0 && errno != EEXIST) {
            snprintf(err, err_len, "cannot create folder %s: mkdir %s: %s", dir, path,
                     strerror(errno));
            return -1;
        }
        path[i] = c;
    }
    return 0;
}

int cli_cmd_keygen(int argc, char **argv)
{
    const char *name = NULL, *dir = ".";
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_help, stdout);
            return 0;
        }
        if (cli_match_value(argc, argv, &i, "--dir", &v)) {
            if (!v || !*v) {
                fprintf(stderr, "fitfarm keygen: --dir needs a folder (see fitfarm keygen --help)\n");
                return 2;
            }
            dir = v;
            continue;
        }
        if (argv[i][0] == '-' || name) {
            fprintf(stderr, "fitfarm keygen: unexpected argument '%s' (see fitfarm keygen --help)\n",
                    argv[i]);
            return 2;
        }
        name = argv[i];
    }
    if (!name) {
        fprintf(stderr, "fitfarm keygen: a NAME is required, e.g. 'fitfarm keygen broker' "
                        "(see fitfarm keygen --help)\n");
        return 2;
    }
    char derr[4400];
    if (s_make_dirs(dir, derr, sizeof derr) != 0) {
        fprintf(stderr, "fitfarm keygen: %s\n", derr);
        return 1;
    }
    common_keypair_t *pair = NULL;
    if (common_keypair_new(&pair) != 0) {
        fprintf(stderr, "fitfarm keygen: cannot make a key pair (libsodium)\n");
        return 1;
    }
    char pub[4200], sec[4200], err[1024];
    int rc = common_keyfile_write_pair(dir, name, pair, pub, sizeof pub, sec, sizeof sec, err,
                                       sizeof err);
    char fp[COMMON_KEY_FINGERPRINT];
    common_key_fingerprint(pair->public_key, fp);
    common_keypair_destroy(&pair);
    if (rc != 0) {
        fprintf(stderr, "fitfarm keygen: %s\n", err);
        return 1;
    }
    printf("public key: %s\nsecret key: %s (keep it private)\nfingerprint: %s\n", pub, sec, fp);
    return 0;
}
