/* main.c: the fitfarm command-line tool's entry: dispatches argv[1] to a
 * subcommand (commands.h). Owns the top-level help and version; each
 * subcommand owns its options. */
#include <stdio.h>
#include <string.h>

#include "commands.h"
#include "limits.h"

static const char s_usage[] =
    "usage: fitfarm COMMAND [options]\n"
    "\n"
    "commands:\n"
    "  demo      search the granular pad with NSGA-II on this machine and draw the front\n"
    "  eval      evaluate genomes from JSON Lines (a local pool, or --broker)\n"
    "  status    show a pool's workers, runs and warnings\n"
    "  runs      list the runs a store holds (--store DIR)\n"
    "  export    write one run's requests and results with provenance (jsonl, csv)\n"
    "  verify    re-simulate a stored run on a pool and report every bit that differs\n"
    "  front     the Pareto front of a results file and its hypervolume\n"
    "  show      draw one granular pad design and its displacement over time\n"
    "  keygen    make a CURVE key pair (NAME.public, NAME.secret)\n"
    "  allow     admit a public key to a broker's clients or workers allow-list\n"
    "  share     let another client key use a run (the broker's runs.share)\n"
#ifdef FITFARM_HAVE_SIM
    "  sim       run one evaluation in this process, optionally with a trace\n"
#endif
    "  version   print the version\n"
    "  help      print this help\n"
    "\n"
    "Run 'fitfarm COMMAND --help' for a command's options.\n";

#define STR_(x) #x
#define STR(x) STR_(x)

int main(int argc, char **argv)
{
    if (argc < 2) {
        fputs(s_usage, stderr);
        return 2;
    }
    const char *cmd = argv[1];
    if (strcmp(cmd, "help") == 0 || strcmp(cmd, "--help") == 0 || strcmp(cmd, "-h") == 0) {
        fputs(s_usage, stdout);
        return 0;
    }
    if (strcmp(cmd, "version") == 0 || strcmp(cmd, "--version") == 0) {
        printf("fitfarm %s (protocol %s)\n", FITFARM_VERSION_STRING, STR(PROTO_VERSION));
        return 0;
    }
    if (strcmp(cmd, "eval") == 0)
        return cli_cmd_eval(argc - 1, argv + 1);
    if (strcmp(cmd, "status") == 0)
        return cli_cmd_status(argc - 1, argv + 1);
    if (strcmp(cmd, "runs") == 0)
        return cli_cmd_runs(argc - 1, argv + 1);
    if (strcmp(cmd, "export") == 0)
        return cli_cmd_export(argc - 1, argv + 1);
    if (strcmp(cmd, "verify") == 0)
        return cli_cmd_verify(argc - 1, argv + 1);
    if (strcmp(cmd, "show") == 0)
        return cli_cmd_show(argc - 1, argv + 1);
    if (strcmp(cmd, "demo") == 0)
        return cli_cmd_demo(argc - 1, argv + 1);
    if (strcmp(cmd, "front") == 0)
        return cli_cmd_front(argc - 1, argv + 1);
    if (strcmp(cmd, "keygen") == 0)
        return cli_cmd_keygen(argc - 1, argv + 1);
    if (strcmp(cmd, "allow") == 0)
        return cli_cmd_allow(argc - 1, argv + 1);
    if (strcmp(cmd, "share") == 0)
        return cli_cmd_share(argc - 1, argv + 1);
#ifdef FITFARM_HAVE_SIM
    if (strcmp(cmd, "sim") == 0)
        return cli_cmd_sim(argc - 1, argv + 1);
#endif
    fprintf(stderr, "fitfarm: unknown command '%s' (see fitfarm help)\n", cmd);
    return 2;
}
