/* store_log.c: the store's writes kept until they commit (see store_log.h).
 * Owns the op array and the byte arena; binds borrowed statements. */
#include "store_log.h"

#include <assert.h>
#include <sqlite3.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"

#define LOG_KEEP_OPS 4096 /* capacity kept across commits */
#define LOG_KEEP_BYTES (1u << 20)

void broker_store_log_init(broker_store_log_t *self)
{
    memset(self, 0, sizeof *self);
}

void broker_store_log_fini(broker_store_log_t *self)
{
    free(self->ops);
    free(self->bytes);
    memset(self, 0, sizeof *self);
}

void broker_store_log_clear(broker_store_log_t *self)
{
    self->n_ops = 0;
    self->n_bytes = 0;
    /* An outage may have grown the log far past one turn: give that back. */
    if (self->cap_ops > LOG_KEEP_OPS) {
        free(self->ops);
        self->ops = NULL;
        self->cap_ops = 0;
    }
    if (self->cap_bytes > LOG_KEEP_BYTES) {
        free(self->bytes);
        self->bytes = NULL;
        self->cap_bytes = 0;
    }
}

size_t broker_store_log_begin(broker_store_log_t *self, int which)
{
    if (self->n_ops == self->cap_ops) {
        self->cap_ops = self->cap_ops ? self->cap_ops * 2 : 256;
        self->ops = common_xrealloc(self->ops, self->cap_ops, sizeof *self->ops);
    }
    broker_store_op_t *op = &self->ops[self->n_ops];
    memset(op, 0, sizeof *op);
    op->which = which;
    return self->n_ops++;
}

static broker_store_val_t *s_val(broker_store_log_t *self, size_t i, int k)
{
    assert(i < self->n_ops && k >= 1 && k <= BROKER_STORE_MAX_PARAMS);
    return &self->ops[i].v[k - 1];
}

void broker_store_log_int(broker_store_log_t *self, size_t i, int k, int64_t v)
{
    broker_store_val_t *val = s_val(self, i, k);
    val->type = SQLITE_INTEGER;
    val->u.i = v;
}

void broker_store_log_real(broker_store_log_t *self, size_t i, int k, double v)
{
    broker_store_val_t *val = s_val(self, i, k);
    val->type = SQLITE_FLOAT;
    val->u.d = v;
}

static size_t s_copy(broker_store_log_t *self, const void *p, size_t n)
{
    if (self->n_bytes + n > self->cap_bytes) {
        size_t cap = self->cap_bytes ? self->cap_bytes : 64 * 1024;
        while (cap < self->n_bytes + n)
            cap *= 2;
        self->bytes = common_xrealloc(self->bytes, cap, 1);
        self->cap_bytes = cap;
    }
    size_t off = self->n_bytes;
    if (n)
        memcpy(self->bytes + off, p, n);
    self->n_bytes += n;
    return off;
}

void broker_store_log_text(broker_store_log_t *self, size_t i, int k, const char *s)
{
    if (!s)
        return; /* stays NULL */
    size_t n = strlen(s);
    assert(n <= UINT32_MAX);
    size_t off = s_copy(self, s, n);
    broker_store_val_t *val = s_val(self, i, k);
    val->type = SQLITE_TEXT;
    val->len = (uint32_t)n;
    val->u.off = off;
}

void broker_store_log_blob(broker_store_log_t *self, size_t i, int k, const void *p, size_t n)
{
    assert(n <= UINT32_MAX);
    size_t off = s_copy(self, p, n);
    broker_store_val_t *val = s_val(self, i, k);
    val->type = SQLITE_BLOB;
    val->len = (uint32_t)n;
    val->u.off = off;
}

void broker_store_log_bind(const broker_store_log_t *self, size_t i, sqlite3_stmt *st, int base,
                           int n)
{
    const broker_store_op_t *op = &self->ops[i];
    for (int j = 1; j <= n && j <= BROKER_STORE_MAX_PARAMS; j++) {
        const broker_store_val_t *v = &op->v[j - 1];
        int k = base + j;
        switch (v->type) {
        case SQLITE_INTEGER:
            sqlite3_bind_int64(st, k, v->u.i);
            break;
        case SQLITE_FLOAT:
            sqlite3_bind_double(st, k, v->u.d);
            break;
        case SQLITE_TEXT:
            /* An empty arena has no pointer to give: "" keeps it text, not NULL. */
            sqlite3_bind_text(st, k, v->len ? (const char *)self->bytes + v->u.off : "",
                              (int)v->len, SQLITE_STATIC);
            break;
        case SQLITE_BLOB:
            if (v->len == 0)
                sqlite3_bind_zeroblob(st, k, 0); /* empty, not NULL */
            else
                sqlite3_bind_blob(st, k, self->bytes + v->u.off, (int)v->len, SQLITE_STATIC);
            break;
        default:
            sqlite3_bind_null(st, k);
            break;
        }
    }
}

int broker_store_log_apply(const broker_store_log_t *self, size_t i, sqlite3_stmt *st)
{
    broker_store_log_bind(self, i, st, 0, sqlite3_bind_parameter_count(st));
    int rc = sqlite3_step(st);
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return rc;
}
