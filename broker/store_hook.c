/* store_hook.c: the shipped, empty store seam (see store_hook.h). Alone in
 * its file so that a test program defining broker_store_hook_txn itself
 * takes the place of this one when linking the broker's static library. */
#include "store_hook.h"

void broker_store_hook_txn(struct sqlite3 *db)
{
    (void)db;
}
