/* output.h: what a worker child prints, caught and logged in bounded pieces.
 * Internal to the worker.
 *
 * Each child's stdout and stderr (and those of the programs it starts: an
 * exec co-process's stderr, a plugin's helpers) go to one pipe read by the
 * worker. The worker keeps at most WORKER_OUTPUT_MAX_BYTES of it per
 * evaluation, drops the rest, and logs what it kept, one log line per output
 * line (each line at most WORKER_OUTPUT_MAX_LINE bytes, control characters
 * escaped), tagged with the job id, then one line "[... N bytes cut]" when
 * anything was dropped. Output is read as it comes, so a plugin that prints
 * 100 MB is never stalled on a full pipe and never reaches the worker's log
 * in full. The owner is the job running when the output was read (pool.c
 * decides): a quick job's last words can land under the next job's id. Not
 * owned: the pipe's creation and polling (pool.c). */
#ifndef WORKER_OUTPUT_H
#define WORKER_OUTPUT_H

#include <stddef.h>
#include <stdint.h>

#define WORKER_OUTPUT_MAX_BYTES (64u * 1024u) /* kept per evaluation */
#define WORKER_OUTPUT_MAX_LINE 1024u          /* bytes of one output line in one log line */

typedef struct {
    char buf[WORKER_OUTPUT_MAX_BYTES];
    size_t len;
    uint64_t cut;    /* bytes dropped since the last flush */
    uint64_t job_id; /* whose output buf holds; 0: nobody's (between jobs) */
    int child;       /* slot number, for the log */
} worker_output_t;

/* Reads what fd (non-blocking) has now into o, dropping what exceeds the
 * bound. Returns 1 at end of file or on an error other than EAGAIN, else 0. */
int worker_output_read(worker_output_t *o, int fd);

/* Logs what o holds under its job id (or the child's number when 0) and
 * empties it. */
void worker_output_flush(worker_output_t *o);

/* worker_output_read for the output of job `owner` (0: nobody's): what was
 * kept for another job is logged first, so each job's lines are logged
 * under its own id. Returns as worker_output_read. */
int worker_output_read_for(worker_output_t *o, int fd, uint64_t owner);

/* The job (or the child) ended: logs what is left and belongs to nobody. */
void worker_output_end(worker_output_t *o);

#endif
