/* memnote.h: what a failure near the address-space limit most likely was.
 * A failed or crashed evaluation whose process came near --mem-limit ran out
 * of memory in all likelihood; the plugin's own message ("out of memory",
 * or a bare SIGSEGV) cannot say so, so the worker adds it, naming the
 * limit. */
#ifndef WORKER_MEMNOTE_H
#define WORKER_MEMNOTE_H

#include <stddef.h>

#include "msg.h"

/* Appends the memory-limit note to o->error when the limit is set
 * (mem_limit_mb > 0), o failed or crashed, and its peak RSS reached three
 * quarters of the limit (peak RSS under-counts address space, hence less
 * than the whole). */
void worker_memnote_apply(proto_outcome_t *o, size_t mem_limit_mb);

#endif
