/* pidfile.h: fitfarm-broker --pid-file FILE, so that scripts and operators
 * signal this broker by its PID (kill -HUP "$(cat FILE)" reloads the
 * allow-lists) rather than by a process name that other brokers share. Owns
 * the file's check, writing and removal; not the signals themselves
 * (loop.c). */
#ifndef BROKER_PIDFILE_H
#define BROKER_PIDFILE_H

#include <stddef.h>

/* Refuses a path that names a live process: returns 0 if path is missing,
 * empty, unreadable as a PID, or names a process that no longer exists (a
 * broker that was killed leaves its file behind); -1 with a sentence in err
 * if the process it names is running. Never blocks. */
int broker_pidfile_check(const char *path, char *err, size_t errlen);
/* Writes "PID\n" to path atomically. Returns 0 or -1 with err. */
int broker_pidfile_write(const char *path, char *err, size_t errlen);
/* Removes path if it still holds our PID (nobody replaced it). */
void broker_pidfile_remove(const char *path);

#endif
