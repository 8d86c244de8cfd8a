/* names.c: the string set of names.h: FNV-1a hashing (Fowler, Noll, Vo; the
 * 64-bit parameters of the published specification), linear probing, grown
 * at half full. Not here: what the names mean. */
#include "names.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

static uint64_t s_hash(const char *text)
{
    uint64_t h = 14695981039346656037ull; /* FNV-1a 64-bit offset basis */
    for (const unsigned char *p = (const unsigned char *)text; *p; p++) {
        h ^= *p;
        h *= 1099511628211ull; /* FNV 64-bit prime */
    }
    return h;
}

static char **s_find(char **slots, size_t cap, const char *text)
{
    size_t i = (size_t)s_hash(text) & (cap - 1);
    while (slots[i] && strcmp(slots[i], text) != 0)
        i = (i + 1) & (cap - 1);
    return &slots[i];
}

static int s_grow(client_names_t *self)
{
    size_t cap = self->cap ? self->cap * 2 : 16;
    char **slots = calloc(cap, sizeof *slots);
    if (!slots)
        return -1;
    for (size_t i = 0; i < self->cap; i++)
        if (self->slots[i])
            *s_find(slots, cap, self->slots[i]) = self->slots[i];
    free(self->slots);
    self->slots = slots;
    self->cap = cap;
    return 0;
}

const char *client_names_put(client_names_t *self, const char *text)
{
    if (self->cap) {
        char **at = s_find(self->slots, self->cap, text);
        if (*at)
            return *at;
    }
    if ((self->count + 1) * 2 > self->cap && s_grow(self) != 0)
        return NULL;
    char *copy = strdup(text);
    if (!copy)
        return NULL;
    *s_find(self->slots, self->cap, text) = copy;
    self->count++;
    return copy;
}

void client_names_fini(client_names_t *self)
{
    for (size_t i = 0; i < self->cap; i++)
        free(self->slots[i]);
    free(self->slots);
    memset(self, 0, sizeof *self);
}
