/* store_sql.h: the store's statements, by the note or read each serves.
 * Internal to the store: store.c prepares every one at open and binds them
 * through its log (store_log.h); the text and why each reads as it does
 * (the acknowledgement mark among them) are in store_sql.c. Not here: the
 * tables (store_schema.c). */
#ifndef BROKER_STORE_SQL_H
#define BROKER_STORE_SQL_H

enum {
    S_BEGIN,
    S_COMMIT,
    S_RUN,
    S_EVAL,
    S_HISTORY,
    S_REQUEST,
    S_FIND_REQUEST,
    S_TAG_END,
    S_FIND_FRESH,
    S_RESULT,
    S_ACK_MARK,
    S_ACK_ROWS,
    S_LOWER_ROWS,
    S_LOWER_MARK,
    S_UNACK,
    S_PLUGIN,
    S_FIND_RUN,
    S_REFRESH,
    S_COUNT_
};

/* The SQL of each statement above, ?N as its parameters. */
extern const char *const broker_store_sql[S_COUNT_];

#endif
