/* commands.h: the fitfarm CLI's subcommands. main.c dispatches on argv[1];
 * each cli_cmd_* parses its own options from argv (argv[0] is the subcommand
 * name) and returns the process exit status: 0 ok, 1 some line or check not
 * ok, 2 usage error. */
#ifndef CLIENT_CLI_COMMANDS_H
#define CLIENT_CLI_COMMANDS_H

int cli_cmd_eval(int argc, char **argv);   /* cmd_eval.c */
int cli_cmd_status(int argc, char **argv); /* cmd_status.c */
int cli_cmd_keygen(int argc, char **argv); /* cmd_keygen.c: a CURVE key pair in two files */
int cli_cmd_allow(int argc, char **argv);  /* cmd_allow.c: admit a key to a broker allow-list */
int cli_cmd_share(int argc, char **argv);  /* cmd_share.c: let another key use a run */
int cli_cmd_sim(int argc, char **argv);    /* cmd_sim.c: one evaluation in-process, optional trace */
int cli_cmd_runs(int argc, char **argv);   /* cmd_runs.c: the runs a store holds */
int cli_cmd_export(int argc, char **argv); /* cmd_runs.c: one run's requests and results */
int cli_cmd_verify(int argc, char **argv); /* cmd_verify.c: re-simulate stored results */
int cli_cmd_front(int argc, char **argv);  /* cmd_front.c: Pareto front and hypervolume of results */
int cli_cmd_show(int argc, char **argv);   /* cmd_show.c: draw one granular design, its trace */
int cli_cmd_demo(int argc, char **argv);   /* cmd_demo.c: NSGA-II on the granular pad, pictures */

#endif
