/* intern.c: the string pool (see intern.h). Owns the copies. */
#include "intern.h"

#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"

static const void *s_text_key(const void *value, size_t *len)
{
    *len = strlen(value);
    return value;
}

void broker_intern_init(broker_intern_t *self)
{
    self->strings = broker_table_new(s_text_key);
}

void broker_intern_fini(broker_intern_t *self)
{
    size_t cur = 0;
    char *s;
    while ((s = broker_table_next(self->strings, &cur)))
        free(s);
    broker_table_destroy(&self->strings);
}

const char *broker_intern(broker_intern_t *self, const char *text)
{
    size_t n = strlen(text);
    char *s = broker_table_get(self->strings, text, n);
    if (!s) {
        s = common_xstrdup(text);
        broker_table_put(self->strings, s, n, s);
    }
    return s;
}
