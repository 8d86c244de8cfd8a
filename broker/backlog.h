/* backlog.h: results owed to clients that are kept in the store, not in RAM.
 * A run's outbox and unacked set are capped (runs.h, "Bounded delivery");
 * a result past the cap stays in the store as a request with acked = 0, and
 * the run remembers the range of tags it owes. Each loop turn, after the
 * commit, this pages those results back in bounded chunks (at most the room
 * under the caps, BROKER_BACKLOG_PAGE per run and BROKER_BACKLOG_TURN per
 * turn), so a client back after a day is fed as fast as it acknowledges and
 * neither the loop nor the memory notice. Not here: the caps and the
 * bookkeeping (runs.c), sending (client_io.c). */
#ifndef BROKER_BACKLOG_H
#define BROKER_BACKLOG_H

#include "core.h"

#define BROKER_BACKLOG_PAGE 4096   /* rows read for one run per turn */
#define BROKER_BACKLOG_TURN 16384  /* rows read per turn over all runs */

/* At start (store_load.c): the partial index on unacknowledged requests, and
 * every run with an answered, unacknowledged request owes it from the store.
 * Returns 0, or -1 after logging why. */
int broker_backlog_load(broker_t *b);
/* One turn's pages into the outboxes of runs whose client is known and that
 * have room. Returns 1 when a run could take more at once (the loop should
 * not sleep), 0 otherwise. */
int broker_backlog_turn(broker_t *b);
/* Frees the prepared statement; before the store closes. */
void broker_backlog_fini(broker_t *b);

#endif
