/* names.h: a set of short strings (worker and host names in results), one
 * copy of each, so a batch of a million results from forty workers holds
 * forty names. Internal, not API. Strings live until the set is finalised. */
#ifndef CLIENT_NAMES_H
#define CLIENT_NAMES_H

#include <stddef.h>

typedef struct {
    char **slots; /* open addressing, power-of-two capacity; NULL = empty */
    size_t cap;
    size_t count;
} client_names_t;

/* The set's copy of text (borrowed, valid until client_names_fini), added if
 * new; NULL on out of memory (the set unchanged). An empty set is all zero. */
const char *client_names_put(client_names_t *self, const char *text);
/* Frees every copy; the set is empty again. */
void client_names_fini(client_names_t *self);

#endif
