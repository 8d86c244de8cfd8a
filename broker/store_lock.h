/* store_lock.h: one broker per store folder. The lock is an flock on
 * DIR/fitfarm.lock, held for the broker's life and released by the kernel
 * when the holder's process ends (however it ends); the file also records
 * who holds it (PID, host, start time), so a real conflict names the other
 * broker. Not SQLite's exclusive mode: readers (the sqlite3 shell, fitfarm
 * export) must still be able to query the store while the broker runs. */
#ifndef BROKER_STORE_LOCK_H
#define BROKER_STORE_LOCK_H

/* Locks DIR/fitfarm.lock. When another process holds it, waits up to
 * wait_ms (a predecessor that was just killed, restarted at once by a
 * supervisor, may take a moment to be gone), logging once who holds it.
 * Returns the locked descriptor (close it to release), or -1 after logging
 * an error naming the holder. */
int broker_store_lock(const char *dir, int wait_ms);

#endif
