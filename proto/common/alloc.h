/* alloc.h: allocation for the daemons. Out of memory or a size that overflows
 * aborts with a message naming the call site, so daemon code carries no dead
 * NULL checks. The client library never uses these: it returns FITFARM_ENOMEM. */
#ifndef COMMON_ALLOC_H
#define COMMON_ALLOC_H

#include <stddef.h>

void *common_xmalloc(size_t size);
void *common_xcalloc(size_t n, size_t size);           /* checks n*size overflow */
void *common_xrealloc(void *p, size_t n, size_t size); /* checks n*size overflow */
char *common_xstrdup(const char *s);
void *common_xmemdup(const void *p, size_t n);
/* Room for one more element at the end of the FIFO buf[*head, *count) of
 * elem-byte elements (capacity *cap): compacted when it is full with a gap
 * at the front, else doubled (to first when empty). Returns the buffer,
 * which may have moved. */
void *common_xfifo_room(void *buf, size_t *head, size_t *count, size_t *cap, size_t elem,
                        size_t first);

#endif
