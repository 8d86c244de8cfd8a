/* log.h: one line per event on stderr, "time level function: text".
 * Daemons and the CLI share this; the client library never logs. */
#ifndef COMMON_LOG_H
#define COMMON_LOG_H

enum { COMMON_LOG_DEBUG = 0, COMMON_LOG_INFO = 1, COMMON_LOG_WARN = 2, COMMON_LOG_ERROR = 3 };

/* Messages below level are dropped. Default COMMON_LOG_INFO; the environment
 * variable FITFARM_LOG=debug|info|warn|error sets it at the first call. */
void common_log_set_level(int level);
/* Tag written after the level, e.g. "broker" or "worker 3"; borrowed. */
void common_log_set_tag(const char *tag);

void common_log_write(int level, const char *func, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

#define LOG_DEBUG(...) common_log_write(COMMON_LOG_DEBUG, __func__, __VA_ARGS__)
#define LOG_INFO(...) common_log_write(COMMON_LOG_INFO, __func__, __VA_ARGS__)
#define LOG_WARN(...) common_log_write(COMMON_LOG_WARN, __func__, __VA_ARGS__)
#define LOG_ERROR(...) common_log_write(COMMON_LOG_ERROR, __func__, __VA_ARGS__)

#endif
