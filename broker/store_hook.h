/* store_hook.h: the one seam where a test build reaches into the store's
 * connection. The broker calls broker_store_hook_txn before it opens each
 * write transaction (a turn's first write, and each retry after a failure).
 * The shipped broker's version (store_hook.c) does nothing and reads
 * nothing; the fault-injection build of the broker used by the integration
 * tests links its own version instead (tests/integration/store_faults.c),
 * so no fault switch exists in the installed program. Not here: anything
 * the broker relies on. */
#ifndef BROKER_STORE_HOOK_H
#define BROKER_STORE_HOOK_H

struct sqlite3;

void broker_store_hook_txn(struct sqlite3 *db);

#endif
