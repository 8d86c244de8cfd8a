/* exec_plugin.h: the exec plugin, which lets an external program (any
 * language) join the pool as a long-lived co-process speaking JSON Lines on
 * its stdin and stdout. Internal to the worker; not API.
 *
 * This module owns: parsing a "NAME=COMMAND" entry from the worker's own
 * configuration (never from a job), probing the program once for its
 * introduction, the heap descriptor registered like a dlopened plugin, and the
 * co-process in each worker child (started on the first evaluation, killed and
 * restarted after any protocol violation). It does not own the child pool, the
 * per-evaluation time-out (the worker kills a child that overruns it; the
 * co-process dies with it) or resource limits.
 *
 * The JSON Lines protocol, version 1
 * ----------------------------------
 * COMMAND is split into words by the worker, without a shell: words are
 * separated by blanks; '...' and "..." quote (no escapes inside '...'; inside
 * "..." a backslash escapes " and \); outside quotes a backslash escapes the
 * next character. No variables, globs, pipes or redirections: write a wrapper
 * script for those. The first word is found on PATH. The program runs in its
 * own process group, with the worker's environment and working directory,
 * stdin and stdout connected to the worker, stderr inherited (the worker
 * child's output pipe: the worker logs at most 64 KiB of it per evaluation,
 * output.h), and no other open descriptors. It dies with its worker child;
 * its helpers die with it, even one that called setsid() (reaper.h).
 *
 * Every message is one JSON object (RFC 8259) on one line ending in "\n",
 * UTF-8, at most 1 MiB. Unknown keys are refused in both directions.
 *
 * 1. On start the program writes its introduction, within 10 seconds:
 *      {"fitfarm_exec": 1, "name": "cantilever", "version": "1.0",
 *       "objectives": 2, "deterministic": true}
 *    fitfarm_exec is the protocol version (1). name is informational (the
 *    worker's configuration names the plugin); version (1-127 printable ASCII
 *    characters) must change whenever results may change; objectives is the
 *    length of every fitness vector, 1..64; deterministic true means results do
 *    not depend on the seed, so all replicates share one cached result.
 *
 * 2. Then, for each evaluation, the worker writes one request
 *      {"genome": [0.25, 0.5], "seed": "1234567890123456789", "params": {}}
 *    genome: the genome's little-endian doubles, each printed with 17
 *    significant digits, so it parses back to the same bits; seed: the
 *    evaluation seed, an unsigned 64-bit integer as a decimal string (JSON
 *    numbers lose bits above 2^53); params: the job's plugin parameters, a
 *    JSON object with sorted keys.
 *
 * 3. and the program answers with exactly one line, one of
 *      {"fitness": [0.0123, 4.5]}      objectives numbers (no null, NaN or inf)
 *      {"invalid": "why"}              the request is bad (genome length, range,
 *                                      params): status invalid, not retried
 *      {"error": "why"}                this evaluation failed: status failed
 *    An answer that is not one of these (garbage, a wrong count, a
 *    non-number, a line over 1 MiB) or an end of output fails the evaluation
 *    with a message naming what was wrong; the worker then kills the program
 *    (its whole process group) and starts it afresh for the next evaluation.
 *    Output between an answer and the next request (an extra line) also gets
 *    the program restarted, before that request is sent. A program that exits
 *    on end of input needs no other shutdown; one that does not is killed
 *    half a second after its input closes.
 *
 * A complete program in Python (objectives: the sum of squares of the genes):
 *
 *     import json, sys
 *     print(json.dumps({"fitfarm_exec": 1, "name": "sphere", "version": "1",
 *                       "objectives": 1, "deterministic": True}), flush=True)
 *     for line in sys.stdin:
 *         req = json.loads(line)
 *         genome = req["genome"]
 *         if not genome:
 *             print(json.dumps({"invalid": "empty genome"}), flush=True)
 *             continue
 *         print(json.dumps({"fitness": [sum(x * x for x in genome)]}), flush=True)
 *
 * Run it with: fitfarm-worker --exec 'sphere=python3 /path/to/sphere.py'
 *
 * Threading: none of this is thread-safe; a worker child evaluates one job at
 * a time, and registration happens before the children are forked. */
#ifndef WORKER_EXEC_PLUGIN_H
#define WORKER_EXEC_PLUGIN_H

#include <stddef.h>
#include <stdint.h>
#include <sys/types.h>

#include "fitfarm_plugin.h"

#define WORKER_EXEC_PROTOCOL 1
#define WORKER_EXEC_MAX_LINE (1024u * 1024u) /* bytes in one line, newline excluded */
#define WORKER_EXEC_INTRO_TIMEOUT_MS 10000   /* the introduction must arrive within */
#define WORKER_EXEC_MAX_COMMAND 4096u        /* bytes of COMMAND */
#define WORKER_EXEC_MAX_WORDS 256u           /* words of COMMAND */
#define WORKER_EXEC_MAX_PLUGINS 16u          /* exec plugins in one worker (WORKER_MAX_EXEC) */

/* Parses spec "NAME=COMMAND", starts the program once, reads and validates its
 * introduction (waiting at most WORKER_EXEC_INTRO_TIMEOUT_MS), stops it again
 * and builds a descriptor: name NAME, version and objectives from the
 * introduction, FITFARM_PLUGIN_DETERMINISTIC if the program declares it.
 * Returns 0 and sets *out (owned by this module: release it with
 * worker_exec_plugin_destroy), or -1 with *out NULL and a sentence naming the
 * problem in err (errlen bytes). Blocks up to the introduction time-out.
 * At most WORKER_EXEC_MAX_PLUGINS descriptors exist at once. */
int worker_exec_plugin_new(const char *spec, const fitfarm_plugin_t **out, char *err,
                           size_t errlen);

/* Releases a descriptor from worker_exec_plugin_new and sets *p to NULL;
 * accepts NULL and *p NULL. Kills (by process group) and reaps the calling
 * process's co-process for it, if any. No context of it may be live. */
void worker_exec_plugin_destroy(const fitfarm_plugin_t **p);

/* BLAKE2b-256 over the command line and the program's introduction line,
 * reported as the build digest (PROTO_DIGEST_BYTES bytes). Borrowed, valid
 * until the descriptor is destroyed; NULL if p is not an exec descriptor. */
const uint8_t *worker_exec_plugin_digest(const fitfarm_plugin_t *p);

/* True when p came from worker_exec_plugin_new and is still alive. */
int worker_exec_plugin_is_exec(const fitfarm_plugin_t *p);

/* How long evaluate waits for an answer, in milliseconds; 0 (the default)
 * waits until the worker's per-evaluation time-out kills the child. When it
 * passes, the evaluation fails and the co-process is killed. */
void worker_exec_plugin_set_answer_timeout(const fitfarm_plugin_t *p, int timeout_ms);

/* The process id of the calling process's co-process for p, or 0 when none
 * runs. For tests and diagnostics. */
long worker_exec_plugin_coprocess_pid(const fitfarm_plugin_t *p);

/* Writes the process ids of the calling process's running co-processes (all
 * exec plugins) into out, at most max; returns the count. The child's sweep
 * after each evaluation spares these (child.c). */
size_t worker_exec_plugin_coprocesses(pid_t *out, size_t max);

#endif
