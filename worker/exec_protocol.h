/* exec_protocol.h: the text side of the exec plugin's JSON Lines protocol
 * (described in exec_plugin.h): splitting COMMAND into words, decoding the
 * introduction and the answers, encoding a request, quoting untrusted text for
 * error messages. Pure code: no processes, no descriptors, no clocks. */
#ifndef WORKER_EXEC_PROTOCOL_H
#define WORKER_EXEC_PROTOCOL_H

#include <stddef.h>
#include <stdint.h>

#include "limits.h"

/* A validated introduction. */
typedef struct {
    char name[PROTO_MAX_NAME_BYTES];
    char version[PROTO_MAX_NAME_BYTES];
    uint32_t objectives; /* 1..PROTO_MAX_OBJECTIVES */
    int deterministic;   /* 0 or 1 */
} worker_exec_intro_t;

/* What an answer line said. */
enum {
    WORKER_EXEC_ANSWER_FITNESS = 0, /* fitness holds objectives numbers */
    WORKER_EXEC_ANSWER_INVALID = 1, /* the program refused the request; err holds its reason */
    WORKER_EXEC_ANSWER_ERROR = 2,   /* the program reported a failure; err holds its reason */
    WORKER_EXEC_ANSWER_BAD = 3,     /* out of protocol; err says what was wrong */
};

/* Splits command into words (rules in exec_plugin.h). On success returns 0 and
 * *argv_out is a NULL-terminated array the caller frees with
 * worker_exec_protocol_argv_free. On failure returns -1 with a sentence in err. */
int worker_exec_protocol_split_command(const char *command, char ***argv_out, char *err,
                                       size_t errlen);
/* Frees an array from worker_exec_protocol_split_command. Accepts NULL. */
void worker_exec_protocol_argv_free(char **argv);

/* Decodes and validates an introduction line (len bytes, no newline). Returns
 * 0, or -1 with a sentence naming the problem in err. */
int worker_exec_protocol_intro_decode(const char *line, size_t len, worker_exec_intro_t *out,
                                      char *err, size_t errlen);

/* Decodes an answer line (len bytes, no newline) for a plugin of `objectives`
 * objectives. Returns a WORKER_EXEC_ANSWER_* value; fills fitness (objectives
 * doubles) only for WORKER_EXEC_ANSWER_FITNESS; writes the program's reason or
 * the protocol problem into err for the others. */
int worker_exec_protocol_answer_decode(const char *line, size_t len, uint32_t objectives,
                                       double *fitness, char *err, size_t errlen);

/* Checks params_json is a JSON object of at most PROTO_MAX_PARAMS_BYTES and
 * returns it as one compact line with sorted keys in *out (malloc'd, the
 * caller frees). Returns 0, or -1 with a sentence in err. */
int worker_exec_protocol_params_line(const char *params_json, char **out, char *err, size_t errlen);

/* Encodes the request for a genome of little-endian doubles, with the trailing
 * newline, into *buf (grown with common_xrealloc; *cap tracks its size; the
 * caller frees it). Sets *len to the bytes written (no NUL counted). Returns 0,
 * or -1 with a sentence in err when the genome is not a whole number of
 * doubles or holds a non-finite gene. */
int worker_exec_protocol_request_encode(const uint8_t *genome, size_t genome_len, uint64_t seed,
                                        const char *params_line, char **buf, size_t *cap,
                                        size_t *len, char *err, size_t errlen);

/* Writes up to max bytes of untrusted text s (n bytes) into out (outlen bytes,
 * NUL-terminated) with every byte outside printable ASCII as \xNN, appending
 * "..." when it had to cut. For error messages and logs. */
void worker_exec_protocol_quote(const char *s, size_t n, size_t max, char *out, size_t outlen);

#endif
