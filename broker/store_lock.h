/* store_lock.h: one broker per store folder, and per database file. The
 * folder lock is an flock on DIR/fitfarm.lock, held for the broker's life and
 * released by the kernel when the holder's process ends (however it ends);
 * the file also records who holds it (PID, host, start time), so a real
 * conflict names the other broker. A folder lock alone misses one database
 * reached through two folders (a hard link, a bind mount), so the broker also
 * takes an open-file-description write lock (F_OFD_SETLK, Linux 3.15+) on one
 * byte of DIR/fitfarm.db itself, far from the bytes SQLite locks. Not SQLite's
 * exclusive mode: readers (the sqlite3 shell, fitfarm export) must still be
 * able to query the store while the broker runs. */
#ifndef BROKER_STORE_LOCK_H
#define BROKER_STORE_LOCK_H

/* Locks DIR/fitfarm.lock, then DIR/DB_FILE (created empty if missing). When
 * another process holds either, waits up to wait_ms (a predecessor that was
 * just killed, restarted at once by a supervisor, may take a moment to be
 * gone), logging once who holds it. Returns the folder lock's descriptor
 * (release both with broker_store_unlock), or -1 after logging an error
 * naming the holder. */
int broker_store_lock(const char *dir, const char *db_file, int wait_ms);

/* Releases what broker_store_lock took; fd is its return value. Accepts -1. */
void broker_store_unlock(int fd);

#endif
