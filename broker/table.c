/* table.c: the open-addressing hash map (see table.h). Capacity is a power of
 * two, load factor kept at or under 3/4: with the hash cached in the slot, a
 * probe that is not the key rarely touches its bytes, and four slots share a
 * cache line, so the expected probes of linear probing at that load (Knuth,
 * TAOCP vol. 3, 6.4: about 2.5 for a hit, 8.5 for a miss) cost one or two
 * lines. Owns only its slot array. */
#include "table.h"

#include <assert.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"

typedef struct {
    uint64_t hash;
    void *value; /* NULL: empty slot */
} s_slot_t;

struct broker_table {
    s_slot_t *slots;
    size_t cap; /* power of two */
    size_t size;
    broker_table_key_fn key_of;
};

/* At most 3/4 full. */
static int s_over_load(size_t size, size_t cap)
{
    return size * 4 > cap * 3;
}

uint64_t broker_table_hash(const void *key, size_t key_len)
{
    const uint8_t *p = key;
    uint64_t h = 0xcbf29ce484222325ull;
    for (size_t i = 0; i < key_len; i++) {
        h ^= p[i];
        h *= 0x100000001b3ull;
    }
    /* splitmix64 finaliser: FNV's low bits are weak for short keys. */
    h ^= h >> 30;
    h *= 0xbf58476d1ce4e5b9ull;
    h ^= h >> 27;
    h *= 0x94d049bb133111ebull;
    h ^= h >> 31;
    return h;
}

broker_table_t *broker_table_new(broker_table_key_fn key_of)
{
    assert(key_of);
    broker_table_t *self = common_xcalloc(1, sizeof *self);
    self->key_of = key_of;
    self->cap = 16;
    self->slots = common_xcalloc(self->cap, sizeof *self->slots);
    return self;
}

void broker_table_destroy(broker_table_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    free((*self_p)->slots);
    free(*self_p);
    *self_p = NULL;
}

static size_t s_find(const broker_table_t *self, const void *key, size_t key_len, uint64_t h)
{
    size_t mask = self->cap - 1;
    size_t i = (size_t)h & mask;
    for (;;) {
        const s_slot_t *s = &self->slots[i];
        if (!s->value)
            return i;
        if (s->hash == h) {
            size_t n;
            const void *k = self->key_of(s->value, &n);
            if (n == key_len && memcmp(k, key, key_len) == 0)
                return i;
        }
        i = (i + 1) & mask;
    }
}

static void s_grow(broker_table_t *self)
{
    s_slot_t *old = self->slots;
    size_t old_cap = self->cap;
    self->cap = old_cap * 2;
    self->slots = common_xcalloc(self->cap, sizeof *self->slots);
    size_t mask = self->cap - 1;
    for (size_t j = 0; j < old_cap; j++) {
        if (!old[j].value)
            continue;
        size_t i = (size_t)old[j].hash & mask;
        while (self->slots[i].value)
            i = (i + 1) & mask;
        self->slots[i] = old[j];
    }
    free(old);
}

void *broker_table_get(const broker_table_t *self, const void *key, size_t key_len)
{
    size_t i = s_find(self, key, key_len, broker_table_hash(key, key_len));
    return self->slots[i].value;
}

void *broker_table_put(broker_table_t *self, const void *key, size_t key_len, void *value)
{
    assert(key && value);
#ifndef NDEBUG
    size_t own_len;
    const void *own = self->key_of(value, &own_len);
    assert(own_len == key_len && memcmp(own, key, key_len) == 0);
#endif
    if (s_over_load(self->size + 1, self->cap))
        s_grow(self);
    uint64_t h = broker_table_hash(key, key_len);
    size_t i = s_find(self, key, key_len, h);
    s_slot_t *s = &self->slots[i];
    void *prev = s->value;
    if (!prev)
        self->size++;
    s->hash = h;
    s->value = value;
    return prev;
}

void *broker_table_delete(broker_table_t *self, const void *key, size_t key_len)
{
    size_t mask = self->cap - 1;
    size_t i = s_find(self, key, key_len, broker_table_hash(key, key_len));
    void *value = self->slots[i].value;
    if (!value)
        return NULL;
    /* Backward shift: pull later members of the cluster into the hole when
     * their home slot does not lie cyclically in (hole, j]. */
    size_t hole = i;
    size_t j = i;
    for (;;) {
        j = (j + 1) & mask;
        if (!self->slots[j].value)
            break;
        size_t home = (size_t)self->slots[j].hash & mask;
        int in_between = (hole <= j) ? (hole < home && home <= j) : (hole < home || home <= j);
        if (!in_between) {
            self->slots[hole] = self->slots[j];
            hole = j;
        }
    }
    memset(&self->slots[hole], 0, sizeof self->slots[hole]);
    self->size--;
    return value;
}

size_t broker_table_size(const broker_table_t *self)
{
    return self->size;
}

void *broker_table_next(const broker_table_t *self, size_t *cursor)
{
    while (*cursor < self->cap) {
        const s_slot_t *s = &self->slots[(*cursor)++];
        if (s->value)
            return s->value;
    }
    return NULL;
}

int broker_table_check(const broker_table_t *self)
{
    size_t n = 0;
    for (size_t i = 0; i < self->cap; i++) {
        const s_slot_t *s = &self->slots[i];
        if (!s->value)
            continue;
        n++;
        size_t key_len;
        const void *key = self->key_of(s->value, &key_len);
        if (s->hash != broker_table_hash(key, key_len))
            return 0;
        if (s_find(self, key, key_len, s->hash) != i)
            return 0;
    }
    return n == self->size && !s_over_load(self->size, self->cap);
}
