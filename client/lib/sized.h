/* sized.h: how the library reads and fills the public structs that carry a
 * leading size field (ABI growth, see fitfarm.h), and the size of its error
 * sentences. Internal, not API. */
#ifndef CLIENT_SIZED_H
#define CLIENT_SIZED_H

#include <string.h>

#define CLIENT_ERR_BYTES 1200

/* Copies a filled full-size public struct into the caller's, only as far as
 * the caller's size field says. */
#define CLIENT_COPY_OUT(out, full)                                                             \
    memcpy((out), &(full), (out)->size < sizeof(full) ? (out)->size : sizeof(full))
/* Reads a caller's public struct into a zeroed full-size one. */
#define CLIENT_COPY_IN(full, in)                                                               \
    do {                                                                                       \
        memset(&(full), 0, sizeof(full));                                                      \
        memcpy(&(full), (in), (in)->size < sizeof(full) ? (in)->size : sizeof(full));          \
    } while (0)

#endif
