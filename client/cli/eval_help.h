/* eval_help.h: the text of `fitfarm eval --help`: every option, its
 * default and what it does. */
#ifndef CLIENT_CLI_EVAL_HELP_H
#define CLIENT_CLI_EVAL_HELP_H

extern const char cli_eval_help[];

#endif
