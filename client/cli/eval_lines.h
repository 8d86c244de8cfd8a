/* eval_lines.h: the lines `fitfarm eval` writes (eval_lines.c): results on
 * stdout, with the input record each answers, and the progress line on the
 * terminal. Not the input parser (jsonl.h). */
#ifndef CLIENT_CLI_EVAL_LINES_H
#define CLIENT_CLI_EVAL_LINES_H

#include <stddef.h>
#include <stdio.h>

#include "fitfarm.h"

/* One input line that produced output: a genome in a batch, or a rejection. */
typedef struct {
    size_t line;
    char *id_json;
    fitfarm_batch_t *batch; /* NULL: invalid input */
    size_t index;
    char *error; /* invalid input: why */
} eval_record_t;

/* {"id", "line", "replicate", "status" — the opening of a request's line. */
void eval_print_head(FILE *out, const eval_record_t *rec, unsigned r, const char *status);
/* A request's whole line; returns 1 when its status is not ok. */
int eval_print_result(FILE *out, const eval_record_t *rec, const fitfarm_result_t *res);
/* The --aggregate line (how: 1 mean, 2 median) of a record whose replicates
 * are all in: per objective over its ok replicates, with the sample standard
 * deviation. */
void eval_print_aggregate(FILE *out, const eval_record_t *rec, unsigned replicates, int how);

/* The progress of a run so far, for the line on the user's terminal. */
typedef struct {
    size_t answered, sent, cached, failed;
    double seconds; /* since the first request was sent */
    double silent;  /* since the last result */
} eval_progress_t;
/* One line redrawn in place (carriage return, clear to end of line):
 * answered of sent, cached, failed, the rate and the time left at that
 * rate, or how long the pool has been silent (a broker out of reach, or a
 * long evaluation); final ends it with a newline. */
void eval_print_progress(FILE *out, const eval_progress_t *p, int final);

#endif
