/* harvest.h: when a worker on a borrowed machine may take jobs (idle
 * harvesting). Internal to the worker.
 *
 * Two rules, both optional: a daily window of local time (--hours, which may
 * wrap past midnight), and a ceiling on the load that other processes put on
 * the machine (--max-load): the 1-minute load average minus the evaluations
 * the worker itself is running. Above the ceiling the worker pauses; it takes
 * jobs again once that load is at or below three quarters of the ceiling, so
 * a load hovering at the ceiling does not toggle it every sample.
 *
 * The 1-minute average lags: after a pause our own past evaluations still
 * count in it for a minute or two, so a pause lasts at least that long; after
 * a resume our new evaluations are subtracted before they show in it, which
 * errs towards taking jobs, never towards pausing because of ourselves.
 *
 * The load comes from /proc/loadavg; FITFARM_TEST_LOADAVG_FILE names another
 * file of the same format to read instead. It is for tests only (they drive
 * the load without loading the machine) and is logged when used.
 *
 * Not here: what a pause does to jobs (loop.c), flags (main.c). Pure apart
 * from reading the load file; callers pass the time in. */
#ifndef WORKER_HARVEST_H
#define WORKER_HARVEST_H

#include <stddef.h>
#include <time.h>

#define WORKER_HARVEST_LOADAVG "/proc/loadavg"
#define WORKER_HARVEST_TEST_ENV "FITFARM_TEST_LOADAVG_FILE"
#define WORKER_HARVEST_MAX_LOAD 10000.0

typedef struct {
    double max_load;     /* > 0: the ceiling; 0: no load rule */
    int has_window;      /* --hours given */
    int start_s, end_s;  /* the window, seconds after local midnight, start != end */
    const char *loadavg; /* the file read for the load; borrowed */
    int paused_for_load; /* hysteresis state */
    int load_unreadable; /* logged once */
} worker_harvest_t;

/* Parses "HH:MM-HH:MM" (each time may carry ":SS") into seconds after
 * midnight. Returns 0, or -1 with a sentence naming what was wrong in err. */
int worker_harvest_parse_hours(const char *text, int *start_s, int *end_s, char *err,
                               size_t errlen);

/* Parses a --max-load value: a number above 0 and at most
 * WORKER_HARVEST_MAX_LOAD. Returns 0, or -1 with a sentence in err. */
int worker_harvest_parse_load(const char *text, double *out, char *err, size_t errlen);

/* Sets self up (no rule when max_load is 0 and hours NULL), reading the load
 * file once when there is a load rule. Returns 0, or -1 with a sentence in
 * err (the load file cannot be read: the rule could not be honoured). */
int worker_harvest_init(worker_harvest_t *self, double max_load, const int *window, char *err,
                        size_t errlen);

/* 1 when any rule is set. */
int worker_harvest_enabled(const worker_harvest_t *self);

/* 1 when seconds_of_day (0..86399) lies in [start_s, end_s), wrapping past
 * midnight when end_s < start_s. */
int worker_harvest_in_window(int start_s, int end_s, int seconds_of_day);

/* Whether the worker may take jobs now (1) or not (0, and reason says why
 * in a short sentence for the broker and the log). running: evaluations this
 * worker runs now; now: wall-clock time (read in local time). */
int worker_harvest_check(worker_harvest_t *self, unsigned running, time_t now, char *reason,
                         size_t reasonlen);

/* The 1-minute load average from path, or -1 when it cannot be read. */
double worker_harvest_read_load(const char *path);

#endif
