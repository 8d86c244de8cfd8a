/* status_page.h: the listener's status page at / (http.c): one
 * self-contained HTML page, inline CSS, no script, no outside resources,
 * refreshing itself, showing what `fitfarm status` shows (status.h): the
 * machines and their slots, the runs with their progress, the warnings.
 * Every string from the network is escaped (outbuf.h). Internal to the broker. */
#ifndef BROKER_STATUS_PAGE_H
#define BROKER_STATUS_PAGE_H

#include <stddef.h>

#include "core.h"

#define BROKER_STATUS_PAGE_REFRESH_S 5
#define BROKER_STATUS_PAGE_RUNS 100 /* runs listed before "... more" */

/* The page; the caller frees it (free()). Broker thread only. */
char *broker_status_page_html(broker_t *b, size_t *len);

#endif
