/* alloc.c: allocation for the daemons. Every failure (out of memory, or a
 * count times size that overflows size_t) aborts with a line on stderr naming
 * the call and the caller's address, so daemon code has no dead NULL checks.
 * Not for the client library, which must never abort (it returns
 * FITFARM_ENOMEM and uses malloc directly). */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"

__attribute__((noreturn)) static void s_die(const char *call, size_t n, size_t size,
                                            const void *caller)
{
    fprintf(stderr, "fitfarm: %s(%zu x %zu bytes) failed (out of memory or overflow), called from %p; aborting\n",
            call, n, size, caller);
    fflush(stderr);
    abort();
}

void *common_xmalloc(size_t size)
{
    /* malloc(0) may return NULL legitimately; ask for one byte instead */
    void *p = malloc(size ? size : 1);
    if (!p)
        s_die("common_xmalloc", 1, size, __builtin_return_address(0));
    return p;
}

void *common_xcalloc(size_t n, size_t size)
{
    if (size && n > SIZE_MAX / size)
        s_die("common_xcalloc", n, size, __builtin_return_address(0));
    void *p = calloc(n ? n : 1, size ? size : 1);
    if (!p)
        s_die("common_xcalloc", n, size, __builtin_return_address(0));
    return p;
}

void *common_xrealloc(void *p, size_t n, size_t size)
{
    if (size && n > SIZE_MAX / size)
        s_die("common_xrealloc", n, size, __builtin_return_address(0));
    size_t total = n * size;
    void *q = realloc(p, total ? total : 1);
    if (!q)
        s_die("common_xrealloc", n, size, __builtin_return_address(0));
    return q;
}

char *common_xstrdup(const char *s)
{
    size_t n = strlen(s) + 1;
    char *p = malloc(n);
    if (!p)
        s_die("common_xstrdup", 1, n, __builtin_return_address(0));
    memcpy(p, s, n);
    return p;
}

void *common_xmemdup(const void *p, size_t n)
{
    void *q = malloc(n ? n : 1);
    if (!q)
        s_die("common_xmemdup", 1, n, __builtin_return_address(0));
    if (n)
        memcpy(q, p, n);
    return q;
}

void *common_xfifo_room(void *buf, size_t *head, size_t *count, size_t *cap, size_t elem,
                        size_t first)
{
    if (*head > 0 && *count == *cap) {
        memmove(buf, (char *)buf + *head * elem, (*count - *head) * elem);
        *count -= *head;
        *head = 0;
    }
    if (*count == *cap) {
        *cap = *cap ? *cap * 2 : first;
        buf = common_xrealloc(buf, *cap, elem);
    }
    return buf;
}
