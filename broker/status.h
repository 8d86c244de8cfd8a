/* status.h: one snapshot of the pool and the runs, as the STATUS message
 * carries it. The STATUS reply to `fitfarm status` (client_io.c) and the
 * listener's pages (metrics.c, status_page.c) all take their numbers from
 * here, so the three always agree. Internal to the broker. Not here: how
 * the numbers are kept (registry.c, runs.c), nor how they are shown. */
#ifndef BROKER_STATUS_H
#define BROKER_STATUS_H

#include "core.h"

/* Fills st with the registered workers (in last-seen order), the runs who
 * may use (access.h; every run held in RAM when every_run is set: the
 * operator's view of the loopback listener, see README "Status page"), at
 * most PROTO_MAX_LIST of them, and the broker's warnings. Strings are
 * borrowed from the broker, valid until its state next changes (the end of
 * this loop turn at the latest); release with broker_status_clear. */
void broker_status_fill(broker_t *b, const char *who, int every_run, proto_status_t *st);

/* Frees what broker_status_fill allocated; st is zeroed. Accepts a zeroed st. */
void broker_status_clear(proto_status_t *st);

#endif
