/* cmd_keygen.c: `fitfarm keygen NAME [--dir DIR]`: a new CURVE key pair in
 * NAME.public and NAME.secret (common/keyfile.h has the format). Refuses to
 * overwrite either file. Not here: allow-lists (cmd_allow.c). */
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
    "current folder and is created (mode 0700) if missing.\n"
    "\n"
    "Then, on the broker's machine:\n"
    "  fitfarm allow client NAME.public --keys KEYS    (a machine that submits)\n"
    "  fitfarm allow worker NAME.public --keys KEYS    (a machine that evaluates)\n"
    "and start the daemons with --key NAME.secret (and --broker-key broker.public).\n"
    "\n"
    "exit status: 0 written, 1 not written (the reason is printed), 2 usage error.\n";

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
    struct stat st;
    if (stat(dir, &st) != 0 && mkdir(dir, 0700) != 0) {
        fprintf(stderr, "fitfarm keygen: cannot create folder %s\n", dir);
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
