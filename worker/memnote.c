/* memnote.c: the note on failures near the address-space limit (see
 * memnote.h). Owns nothing. */
#include "memnote.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"

void worker_memnote_apply(proto_outcome_t *o, size_t mem_limit_mb)
{
    uint64_t limit_kb = (uint64_t)mem_limit_mb * 1024u;
    if (!limit_kb || o->status == PROTO_STATUS_OK || o->status == PROTO_STATUS_INVALID ||
        o->peak_rss_kb < limit_kb / 4u * 3u)
        return;
    const char *was = o->error ? o->error : "";
    size_t n = strlen(was) + 128;
    char *e = common_xmalloc(n);
    snprintf(e, n, "%s%smemory limit: the evaluation's process reached %llu MB of its %zu MB "
             "--mem-limit",
             was, was[0] ? "; " : "", (unsigned long long)(o->peak_rss_kb / 1024u), mem_limit_mb);
    free(o->error);
    o->error = e;
}
