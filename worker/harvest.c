/* harvest.c: the idle-harvesting rules (harvest.h): parsing --hours and
 * --max-load, reading the load average, deciding whether to take jobs.
 * Owns no jobs and no sockets. */
#include "harvest.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/log.h"

/* "HH:MM" or "HH:MM:SS" at *p, advancing p; -1 when it is not one. */
static int s_clock_time(const char **p)
{
    int part[3] = {0, 0, 0}, n = 0;
    const char *s = *p;
    for (;;) {
        if (s[0] < '0' || s[0] > '9' || s[1] < '0' || s[1] > '9')
            return -1;
        part[n++] = (s[0] - '0') * 10 + (s[1] - '0');
        s += 2;
        if (*s != ':' || n == 3)
            break;
        s++;
    }
    if (n < 2 || part[0] > 23 || part[1] > 59 || part[2] > 59)
        return -1;
    *p = s;
    return part[0] * 3600 + part[1] * 60 + part[2];
}

int worker_harvest_parse_hours(const char *text, int *start_s, int *end_s, char *err, size_t errlen)
{
    const char *p = text;
    int a = s_clock_time(&p);
    int b = -1;
    if (a >= 0 && *p == '-') {
        p++;
        b = s_clock_time(&p);
    }
    if (a < 0 || b < 0 || *p) {
        snprintf(err, errlen,
                 "--hours needs START-END in 24-hour local time, e.g. 19:00-07:30 (seconds "
                 "optional: 19:00:30), got \"%s\"",
                 text);
        return -1;
    }
    if (a == b) {
        snprintf(err, errlen,
                 "--hours %s starts and ends at the same time: leave --hours out to take jobs "
                 "at any hour",
                 text);
        return -1;
    }
    *start_s = a;
    *end_s = b;
    return 0;
}

int worker_harvest_parse_load(const char *text, double *out, char *err, size_t errlen)
{
    char *end = NULL;
    errno = 0;
    double v = strtod(text, &end);
    if (errno || !end || end == text || *end || !isfinite(v) || v <= 0 ||
        v > WORKER_HARVEST_MAX_LOAD) {
        snprintf(err, errlen,
                 "--max-load needs a load above 0 and at most %g (runnable processes other "
                 "than ours, e.g. 1.5), got \"%s\"",
                 WORKER_HARVEST_MAX_LOAD, text);
        return -1;
    }
    *out = v;
    return 0;
}

double worker_harvest_read_load(const char *path)
{
    FILE *f = fopen(path, "re");
    if (!f)
        return -1;
    char line[256];
    double v = -1;
    if (fgets(line, sizeof line, f)) {
        char *end = NULL;
        errno = 0;
        double x = strtod(line, &end);
        /* The first field, then a space (the format of proc(5)). */
        if (!errno && end != line && (*end == ' ' || *end == '\n') && isfinite(x) && x >= 0)
            v = x;
    }
    fclose(f);
    return v;
}

int worker_harvest_init(worker_harvest_t *self, double max_load, const int *window, char *err,
                        size_t errlen)
{
    memset(self, 0, sizeof *self);
    self->max_load = max_load;
    if (window) {
        self->has_window = 1;
        self->start_s = window[0];
        self->end_s = window[1];
    }
    const char *test = getenv(WORKER_HARVEST_TEST_ENV);
    int testing = test && test[0];
    self->loadavg = testing ? test : WORKER_HARVEST_LOADAVG;
    if (max_load > 0) {
        if (testing)
            LOG_WARN("reading the load from %s (%s, for tests only) instead of %s", self->loadavg,
                     WORKER_HARVEST_TEST_ENV, WORKER_HARVEST_LOADAVG);
        if (worker_harvest_read_load(self->loadavg) < 0) {
            snprintf(err, errlen, "--max-load: cannot read the load average from %s",
                     self->loadavg);
            return -1;
        }
    }
    return 0;
}

int worker_harvest_enabled(const worker_harvest_t *self)
{
    return self->max_load > 0 || self->has_window;
}

int worker_harvest_in_window(int start_s, int end_s, int seconds_of_day)
{
    if (start_s < end_s)
        return seconds_of_day >= start_s && seconds_of_day < end_s;
    return seconds_of_day >= start_s || seconds_of_day < end_s;
}

static void s_hhmm(char *out, size_t len, int s)
{
    if (s % 60)
        snprintf(out, len, "%02d:%02d:%02d", s / 3600, s / 60 % 60, s % 60);
    else
        snprintf(out, len, "%02d:%02d", s / 3600, s / 60 % 60);
}

int worker_harvest_check(worker_harvest_t *self, unsigned running, time_t now, char *reason,
                         size_t reasonlen)
{
    if (self->has_window) {
        struct tm tm;
        memset(&tm, 0, sizeof tm);
        (void)localtime_r(&now, &tm);
        /* A leap second (tm_sec 60) belongs to its minute. */
        int sod = tm.tm_hour * 3600 + tm.tm_min * 60 + (tm.tm_sec > 59 ? 59 : tm.tm_sec);
        if (!worker_harvest_in_window(self->start_s, self->end_s, sod)) {
            char a[16], b[16];
            s_hhmm(a, sizeof a, self->start_s);
            s_hhmm(b, sizeof b, self->end_s);
            snprintf(reason, reasonlen, "outside --hours %s-%s (local time)", a, b);
            return 0;
        }
    }
    if (self->max_load > 0) {
        double load = worker_harvest_read_load(self->loadavg);
        if (load < 0) {
            /* Keep the last decision: a passing read failure says nothing
             * about the owner. */
            if (!self->load_unreadable)
                LOG_WARN("cannot read the load average from %s; keeping the last decision "
                         "(%s) until it can be read",
                         self->loadavg, self->paused_for_load ? "paused" : "taking jobs");
            self->load_unreadable = 1;
        } else {
            self->load_unreadable = 0;
            double others = load - (double)running;
            if (!self->paused_for_load && others > self->max_load)
                self->paused_for_load = 1;
            else if (self->paused_for_load && others <= self->max_load * 0.75)
                self->paused_for_load = 0;
            if (self->paused_for_load)
                snprintf(reason, reasonlen,
                         "load %.2f from other processes, above --max-load %g (resumes at "
                         "%g)",
                         others < 0 ? 0.0 : others, self->max_load, self->max_load * 0.75);
        }
        if (self->paused_for_load) {
            if (load < 0)
                snprintf(reason, reasonlen, "load unknown, was above --max-load %g",
                         self->max_load);
            return 0;
        }
    }
    return 1;
}
