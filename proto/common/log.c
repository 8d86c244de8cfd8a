/* log.c: one line per event on stderr:
 *   2026-12-02T10:11:12.345Z INFO  broker broker_loop_run: text
 * (UTC time with milliseconds, level padded to five, optional tag, function).
 * Each line is formatted first and written with one fputs under the stream
 * lock, so lines from threads and forked children do not interleave. The
 * level comes from FITFARM_LOG (debug|info|warn|error) at the first call
 * unless common_log_set_level ran first. Not here: log files or rotation
 * (systemd's journal takes stderr). */
#include <stdarg.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <time.h>

#include "clock.h"
#include "log.h"

#define S_LEVEL_UNSET (-1)

static atomic_int s_level = S_LEVEL_UNSET;
static const char *_Atomic s_tag;

static int s_level_from_env(void)
{
    const char *v = getenv("FITFARM_LOG");
    if (!v)
        return COMMON_LOG_INFO;
    if (!strcasecmp(v, "debug"))
        return COMMON_LOG_DEBUG;
    if (!strcasecmp(v, "warn") || !strcasecmp(v, "warning"))
        return COMMON_LOG_WARN;
    if (!strcasecmp(v, "error"))
        return COMMON_LOG_ERROR;
    return COMMON_LOG_INFO;
}

static int s_current_level(void)
{
    int level = atomic_load(&s_level);
    if (level == S_LEVEL_UNSET) {
        int expect = S_LEVEL_UNSET;
        level = s_level_from_env();
        /* if another thread won the race, use its value */
        if (!atomic_compare_exchange_strong(&s_level, &expect, level))
            level = expect;
    }
    return level;
}

void common_log_set_level(int level)
{
    if (level < COMMON_LOG_DEBUG)
        level = COMMON_LOG_DEBUG;
    if (level > COMMON_LOG_ERROR)
        level = COMMON_LOG_ERROR;
    atomic_store(&s_level, level);
}

void common_log_set_tag(const char *tag)
{
    atomic_store(&s_tag, tag);
}

void common_log_write(int level, const char *func, const char *fmt, ...)
{
    static const char *const s_names[] = {"DEBUG", "INFO ", "WARN ", "ERROR"};
    if (level < s_current_level())
        return;
    if (level < COMMON_LOG_DEBUG)
        level = COMMON_LOG_DEBUG;
    if (level > COMMON_LOG_ERROR)
        level = COMMON_LOG_ERROR;

    char line[2048];
    int64_t now = common_wall_ms();
    time_t secs = (time_t)(now / 1000);
    struct tm tm;
    gmtime_r(&secs, &tm);
    size_t n = strftime(line, sizeof line, "%Y-%m-%dT%H:%M:%S", &tm);
    const char *tag = atomic_load(&s_tag);
    int k = snprintf(line + n, sizeof line - n, ".%03dZ %s %s%s%s: ", (int)(now % 1000),
                     s_names[level], tag ? tag : "", tag ? " " : "", func ? func : "?");
    if (k > 0)
        n += (size_t)k < sizeof line - n ? (size_t)k : sizeof line - n - 1;
    va_list ap;
    va_start(ap, fmt);
    k = vsnprintf(line + n, sizeof line - n, fmt, ap);
    va_end(ap);
    if (k > 0)
        n += (size_t)k < sizeof line - n ? (size_t)k : sizeof line - n - 1;
    /* one event, one line: drop the caller's trailing newlines, add ours */
    while (n > 0 && line[n - 1] == '\n')
        n--;
    if (n > sizeof line - 2)
        n = sizeof line - 2;
    line[n++] = '\n';
    line[n] = '\0';
    flockfile(stderr);
    fputs(line, stderr);
    fflush(stderr);
    funlockfile(stderr);
}
