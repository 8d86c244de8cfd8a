/* intern.h: one shared copy of each distinct string (plugin params texts),
 * so thousands of evaluations of one batch share one params buffer. Strings
 * live until the pool is finalised. Not a cache of anything else. */
#ifndef BROKER_INTERN_H
#define BROKER_INTERN_H

#include "table.h"

typedef struct {
    broker_table_t *strings;
} broker_intern_t;

void broker_intern_init(broker_intern_t *self);
void broker_intern_fini(broker_intern_t *self);
/* Borrowed copy of text, valid until fini. */
const char *broker_intern(broker_intern_t *self, const char *text);

#endif
