/* metrics.h: the broker's numbers as Prometheus text exposition (format
 * 0.0.4), for the listener's /metrics (http.c). Per run and per worker they
 * are the ones `fitfarm status` shows (status.h), over every run in RAM.
 * Internal to the broker. Not here: serving them (http.c). */
#ifndef BROKER_METRICS_H
#define BROKER_METRICS_H

#include <stddef.h>

#include "core.h"

/* The page; the caller frees it (free()). Reads broker state: call on the
 * broker's thread only. */
char *broker_metrics_text(broker_t *b, size_t *len);

#endif
