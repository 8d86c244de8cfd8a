/* ring.c: see ring.h. */
#include "ring.h"

#include <stdlib.h>
#include <string.h>

int client_ring_reserve(void **buf, size_t *cap, size_t *head, size_t len, size_t elem,
                        size_t first_cap)
{
    if (len < *cap)
        return 0;
    size_t ncap = *cap ? *cap * 2 : first_cap;
    unsigned char *q = malloc(ncap * elem);
    if (!q)
        return -1;
    const unsigned char *old = *buf;
    for (size_t i = 0; i < len; i++)
        memcpy(q + i * elem, old + ((*head + i) % *cap) * elem, elem);
    free(*buf);
    *buf = q;
    *cap = ncap;
    *head = 0;
    return 0;
}
