/* msg_decode.c: MessagePack bytes from the network -> proto_msg_t, strictly.
 *
 * We read the bytes with our own bounded cursor instead of msgpack-c's
 * unpacker. The C unpacker (msgpack_unpack_next / msgpack_unpacker) builds a
 * msgpack_object tree and allocates for each array by its *declared* element
 * count before any element bytes exist, so five hostile bytes (0xdd ff ff ff
 * ff) make it reserve 2^32 objects; it also accepts every type everywhere and
 * would leave all checks to a second pass. The cursor here instead checks
 * every declared size and count against proto_limits_t and against the bytes
 * that remain (an array of n elements needs at least n bytes, n doubles need
 * 9n bytes) before allocating anything, checks each element's type as it
 * reads it, and never reads past buf[len). On failure everything built so far
 * is freed and the error text names the field path, e.g.
 * "SUBMIT.items[3].genome: 2000000 bytes, limit 1048576".
 *
 * Not here: encoding (msg_encode.c), freeing (msg_free.c). */
#include <stdarg.h>
#include <stdio.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "msg.h"
#include "msg_layout.h"

/* Longest field path we build, e.g. "STATUS.workers[99999].plugins[255]". */
#define S_PATH_MAX 96

typedef struct {
    const uint8_t *buf;
    size_t len;
    size_t pos;
    proto_limits_t lim;
    proto_err_t *err;
    char path[S_PATH_MAX];
    size_t path_len;
} s_cursor_t;

/* ---- errors and field paths ------------------------------------------- */

static int s_fail(s_cursor_t *c, int code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static int s_fail(s_cursor_t *c, int code, const char *fmt, ...)
{
    if (c->err) {
        char detail[128];
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(detail, sizeof detail, fmt, ap);
        va_end(ap);
        /* path and detail may together exceed text[]: truncate on purpose */
        char full[S_PATH_MAX + sizeof detail + 4];
        int n = snprintf(full, sizeof full, "%s: %s", c->path_len ? c->path : "message", detail);
        size_t len = n < 0 ? 0 : (size_t)n;
        if (len >= sizeof c->err->text)
            len = sizeof c->err->text - 1;
        memcpy(c->err->text, full, len);
        c->err->text[len] = '\0';
        c->err->code = code;
    }
    return code;
}

/* Appends a path component; returns the previous length for s_path_pop. */
static size_t s_path_push(s_cursor_t *c, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

static size_t s_path_push(s_cursor_t *c, const char *fmt, ...)
{
    size_t old = c->path_len;
    if (old < sizeof c->path) {
        va_list ap;
        va_start(ap, fmt);
        int n = vsnprintf(c->path + old, sizeof c->path - old, fmt, ap);
        va_end(ap);
        if (n > 0)
            c->path_len = old + (size_t)n < sizeof c->path ? old + (size_t)n : sizeof c->path - 1;
    }
    return old;
}

/* The same as s_path_push for text known in advance: FIELD and ELEM run for
 * every field of every message, and formatting there cost a few per cent of
 * the broker's and worker's CPU (tests/bench/bench_decode). Truncates exactly
 * as s_path_push does. */
static size_t s_path_put(s_cursor_t *c, const char *text, size_t n)
{
    size_t old = c->path_len;
    if (old + 1 < sizeof c->path) {
        size_t room = sizeof c->path - 1 - old;
        if (n > room)
            n = room;
        memcpy(c->path + old, text, n);
        c->path_len = old + n;
        c->path[c->path_len] = '\0';
    }
    return old;
}

/* Appends "[i]". */
static size_t s_path_index(s_cursor_t *c, uint64_t i)
{
    char tmp[24];
    char *p = tmp + sizeof tmp;
    *--p = ']';
    do {
        *--p = (char)('0' + i % 10);
        i /= 10;
    } while (i);
    *--p = '[';
    return s_path_put(c, p, (size_t)(tmp + sizeof tmp - p));
}

static void s_path_pop(s_cursor_t *c, size_t old)
{
    c->path_len = old;
    c->path[old] = '\0';
}

/* ---- raw bytes ---------------------------------------------------------- */

static size_t s_left(const s_cursor_t *c)
{
    return c->len - c->pos;
}

/* Reads an n-byte big-endian unsigned integer (n <= 8). */
static int s_take_be(s_cursor_t *c, size_t n, uint64_t *v)
{
    if (s_left(c) < n)
        return s_fail(c, PROTO_ETRUNCATED, "input ends inside a value");
    uint64_t x = 0;
    for (size_t i = 0; i < n; i++)
        x = (x << 8) | c->buf[c->pos + i];
    c->pos += n;
    *v = x;
    return PROTO_OK;
}

static int s_take_byte(s_cursor_t *c, uint8_t *b)
{
    if (s_left(c) < 1)
        return s_fail(c, PROTO_ETRUNCATED, "input ends before this field");
    *b = c->buf[c->pos++];
    return PROTO_OK;
}

/* Name of the MessagePack type a leading byte introduces, for error texts. */
static const char *s_type_of(uint8_t b)
{
    if (b <= 0x7f || (b >= 0xcc && b <= 0xcf)) return "uint";
    if (b >= 0xe0 || (b >= 0xd0 && b <= 0xd3)) return "int";
    if (b >= 0x80 && b <= 0x8f) return "map";
    if (b >= 0x90 && b <= 0x9f) return "array";
    if (b >= 0xa0 && b <= 0xbf) return "str";
    switch (b) {
    case 0xc0: return "nil";
    case 0xc2: case 0xc3: return "bool";
    case 0xc4: case 0xc5: case 0xc6: return "bin";
    case 0xca: return "float 32";
    case 0xcb: return "float 64";
    case 0xd9: case 0xda: case 0xdb: return "str";
    case 0xdc: case 0xdd: return "array";
    case 0xde: case 0xdf: return "map";
    default: return "ext";
    }
}

/* ---- typed readers ------------------------------------------------------ */

/* A non-negative integer of any width. Non-negative values in the signed
 * forms are accepted too (some encoders use them); negatives are refused. */
static int s_read_u64(s_cursor_t *c, uint64_t *v)
{
    uint8_t b = 0;
    int rc = s_take_byte(c, &b);
    if (rc)
        return rc;
    if (b <= 0x7f) {
        *v = b;
        return PROTO_OK;
    }
    if (b >= 0xcc && b <= 0xcf)
        return s_take_be(c, (size_t)1 << (b - 0xcc), v);
    if (b >= 0xd0 && b <= 0xd3) {
        size_t n = (size_t)1 << (b - 0xd0);
        if ((rc = s_take_be(c, n, v)))
            return rc;
        if (*v >> (8 * n - 1))
            return s_fail(c, PROTO_ETYPE, "negative int, expected uint");
        return PROTO_OK;
    }
    if (b >= 0xe0)
        return s_fail(c, PROTO_ETYPE, "negative int, expected uint");
    return s_fail(c, PROTO_ETYPE, "%s, expected uint", s_type_of(b));
}

static int s_read_u32(s_cursor_t *c, uint32_t *v)
{
    uint64_t x = 0;
    int rc = s_read_u64(c, &x);
    if (rc)
        return rc;
    if (x > UINT32_MAX)
        return s_fail(c, PROTO_EVALUE, "%llu does not fit 32 bits", (unsigned long long)x);
    *v = (uint32_t)x;
    return PROTO_OK;
}

static int s_read_f64(s_cursor_t *c, double *v)
{
    uint8_t b = 0;
    uint64_t bits = 0;
    int rc = s_take_byte(c, &b);
    if (rc)
        return rc;
    if (b != 0xcb)
        return s_fail(c, PROTO_ETYPE, "%s, expected float 64", s_type_of(b));
    if ((rc = s_take_be(c, 8, &bits)))
        return rc;
    memcpy(v, &bits, sizeof *v); /* bit copy: NaN payloads survive */
    return PROTO_OK;
}

/* A measurement (seconds, a time stamp): finite and not negative. */
static int s_read_f64_measure(s_cursor_t *c, double *v)
{
    int rc = s_read_f64(c, v);
    if (rc == PROTO_OK && !(isfinite(*v) && *v >= 0))
        return s_fail(c, PROTO_EVALUE, "%g, expected a finite value >= 0", *v);
    return rc;
}

/* A calibration score: finite, 0 to PROTO_MAX_SPEED. */
static int s_read_speed(s_cursor_t *c, double *v)
{
    int rc = s_read_f64(c, v);
    if (rc == PROTO_OK && !(isfinite(*v) && *v >= 0 && *v <= PROTO_MAX_SPEED))
        return s_fail(c, PROTO_EVALUE, "%g, expected a finite value from 0 to %g", *v,
                      PROTO_MAX_SPEED);
    return rc;
}

static int s_read_bool(s_cursor_t *c, uint8_t *v)
{
    uint8_t b = 0;
    int rc = s_take_byte(c, &b);
    if (rc)
        return rc;
    if (b != 0xc2 && b != 0xc3)
        return s_fail(c, PROTO_ETYPE, "%s, expected bool", s_type_of(b));
    *v = b == 0xc3;
    return PROTO_OK;
}

/* Array header; checks n <= limit and n * min_elem <= bytes left, both before
 * the caller allocates anything for the elements. */
static int s_read_array(s_cursor_t *c, uint32_t limit, size_t min_elem, uint32_t *n)
{
    uint8_t b = 0;
    uint64_t x = 0;
    int rc = s_take_byte(c, &b);
    if (rc)
        return rc;
    if (b >= 0x90 && b <= 0x9f)
        x = b & 0x0f;
    else if (b == 0xdc || b == 0xdd) {
        if ((rc = s_take_be(c, b == 0xdc ? 2 : 4, &x)))
            return rc;
    } else
        return s_fail(c, PROTO_ETYPE, "%s, expected array", s_type_of(b));
    if (x > limit)
        return s_fail(c, PROTO_ELIMIT, "%llu elements, limit %lu", (unsigned long long)x,
                      (unsigned long)limit);
    if (x > s_left(c) / min_elem)
        return s_fail(c, PROTO_ETRUNCATED, "%llu elements declared, only %zu bytes left",
                      (unsigned long long)x, s_left(c));
    *n = (uint32_t)x;
    return PROTO_OK;
}

/* An array header whose count is fixed by the protocol (a struct). */
static int s_read_tuple(s_cursor_t *c, uint32_t expect)
{
    uint8_t b = 0;
    uint64_t x = 0;
    int rc = s_take_byte(c, &b);
    if (rc)
        return rc;
    if (b >= 0x90 && b <= 0x9f)
        x = b & 0x0f;
    else if (b == 0xdc || b == 0xdd) {
        if ((rc = s_take_be(c, b == 0xdc ? 2 : 4, &x)))
            return rc;
    } else
        return s_fail(c, PROTO_ETYPE, "%s, expected array", s_type_of(b));
    if (x != expect)
        return s_fail(c, PROTO_ECOUNT, "%llu elements, expected %lu", (unsigned long long)x,
                      (unsigned long)expect);
    return PROTO_OK;
}

/* Length of a str (want_str) or bin, checked against limit and bytes left. */
static int s_read_len(s_cursor_t *c, int want_str, uint32_t limit, uint32_t *n)
{
    uint8_t b = 0;
    uint64_t x = 0;
    int rc = s_take_byte(c, &b);
    if (rc)
        return rc;
    if (want_str && b >= 0xa0 && b <= 0xbf)
        x = b & 0x1f;
    else if (want_str && b >= 0xd9 && b <= 0xdb) {
        if ((rc = s_take_be(c, (size_t)1 << (b - 0xd9), &x)))
            return rc;
    } else if (!want_str && b >= 0xc4 && b <= 0xc6) {
        if ((rc = s_take_be(c, (size_t)1 << (b - 0xc4), &x)))
            return rc;
    } else
        return s_fail(c, PROTO_ETYPE, "%s, expected %s", s_type_of(b), want_str ? "str" : "bin");
    if (x > limit)
        return s_fail(c, PROTO_ELIMIT, "%llu bytes, limit %lu", (unsigned long long)x,
                      (unsigned long)limit);
    if (x > s_left(c))
        return s_fail(c, PROTO_ETRUNCATED, "%llu bytes declared, only %zu left",
                      (unsigned long long)x, s_left(c));
    *n = (uint32_t)x;
    return PROTO_OK;
}

/* A str of at most limit bytes without NUL, as a new NUL-terminated string. */
static int s_read_str(s_cursor_t *c, uint32_t limit, char **out)
{
    uint32_t n = 0;
    int rc = s_read_len(c, 1, limit, &n);
    if (rc)
        return rc;
    const uint8_t *p = c->buf + c->pos;
    if (n && memchr(p, 0, n))
        return s_fail(c, PROTO_EVALUE, "NUL byte inside str");
    char *s = malloc((size_t)n + 1);
    if (!s)
        return s_fail(c, PROTO_ENOMEM, "out of memory");
    if (n)
        memcpy(s, p, n);
    s[n] = '\0';
    c->pos += n;
    *out = s;
    return PROTO_OK;
}

/* A bin of at most limit bytes, as a new buffer (NULL when empty). */
static int s_read_bin(s_cursor_t *c, uint32_t limit, uint8_t **out, uint32_t *out_len)
{
    uint32_t n = 0;
    int rc = s_read_len(c, 0, limit, &n);
    if (rc)
        return rc;
    uint8_t *p = NULL;
    if (n) {
        p = malloc(n);
        if (!p)
            return s_fail(c, PROTO_ENOMEM, "out of memory");
        memcpy(p, c->buf + c->pos, n);
    }
    c->pos += n;
    *out = p;
    *out_len = n;
    return PROTO_OK;
}

/* A bin of exactly n bytes into a fixed buffer (keys, digests). */
static int s_read_bin_fixed(s_cursor_t *c, uint8_t *out, uint32_t n)
{
    uint32_t got = 0;
    int rc = s_read_len(c, 0, UINT32_MAX, &got);
    if (rc)
        return rc;
    if (got != n)
        return s_fail(c, PROTO_EVALUE, "%lu bytes, expected exactly %lu", (unsigned long)got,
                      (unsigned long)n);
    memcpy(out, c->buf + c->pos, n);
    c->pos += n;
    return PROTO_OK;
}

static int s_read_status(s_cursor_t *c, uint32_t *status)
{
    int rc = s_read_u32(c, status);
    if (rc == PROTO_OK && *status >= PROTO_STATUS_COUNT_)
        rc = s_fail(c, PROTO_EVALUE, "status %lu unknown", (unsigned long)*status);
    return rc;
}

/* zeroed array of n elements; n == 0 gives NULL. */
static int s_alloc(s_cursor_t *c, void **p, uint32_t n, size_t size)
{
    *p = NULL;
    if (n == 0)
        return PROTO_OK;
    *p = calloc(n, size);
    if (!*p)
        return s_fail(c, PROTO_ENOMEM, "out of memory for %lu elements", (unsigned long)n);
    return PROTO_OK;
}

/* FIELD(name, call): reads one named field; the name stays on the path if
 * the call fails, so the error text names it. ELEM does the same for "[i]". */
#define FIELD(name, call)                                         \
    do {                                                          \
        size_t old_ = s_path_put(c, "." name, sizeof("." name) - 1); \
        if ((rc = (call)) != PROTO_OK)                            \
            goto cleanup;                                         \
        s_path_pop(c, old_);                                      \
    } while (0)
#define ELEM(i, call)                                  \
    do {                                               \
        size_t old_ = s_path_index(c, (uint64_t)(i));  \
        if ((rc = (call)) != PROTO_OK)                 \
            goto cleanup;                              \
        s_path_pop(c, old_);                           \
    } while (0)
/* An error about a field just read, e.g. a value out of its domain. */
#define FIELD_FAIL(name, code, ...)              \
    do {                                         \
        s_path_push(c, "." name);                \
        rc = s_fail(c, (code), __VA_ARGS__);     \
        goto cleanup;                            \
    } while (0)

/* An array of f64 (fitness vectors; with measure, medians: finite, >= 0). */
static int s_read_f64_array(s_cursor_t *c, uint32_t limit, uint32_t *n_out, double **out,
                            int measure)
{
    int rc;
    uint32_t n = 0;
    if ((rc = s_read_array(c, limit, 9, &n)) || (rc = s_alloc(c, (void **)out, n, sizeof **out)))
        goto cleanup;
    *n_out = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, measure ? s_read_f64_measure(c, &(*out)[i]) : s_read_f64(c, &(*out)[i]));
cleanup:
    return rc;
}

/* An array of str (plugin lists, warnings). */
static int s_read_str_array(s_cursor_t *c, uint32_t count_limit, uint32_t str_limit,
                            uint32_t *n_out, char ***out)
{
    int rc;
    uint32_t n = 0;
    if ((rc = s_read_array(c, count_limit, 1, &n)) || (rc = s_alloc(c, (void **)out, n, sizeof **out)))
        goto cleanup;
    *n_out = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_read_str(c, str_limit, &(*out)[i]));
cleanup:
    return rc;
}

/* An array of uint (ACK tags). */
static int s_read_u64_array(s_cursor_t *c, uint32_t limit, uint32_t *n_out, uint64_t **out)
{
    int rc;
    uint32_t n = 0;
    if ((rc = s_read_array(c, limit, 1, &n)) || (rc = s_alloc(c, (void **)out, n, sizeof **out)))
        goto cleanup;
    *n_out = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_read_u64(c, &(*out)[i]));
cleanup:
    return rc;
}

/* "name@version" strings in STATUS: two names and the '@'. */
static uint32_t s_plugin_ref_limit(const s_cursor_t *c)
{
    return 2 * c->lim.name_bytes + 1;
}

/* ---- messages ----------------------------------------------------------- */

static int s_item(s_cursor_t *c, proto_item_t *it)
{
    int rc;
    if ((rc = s_read_tuple(c, 3)))
        goto cleanup;
    FIELD("tag", s_read_u64(c, &it->tag));
    FIELD("replicate", s_read_u32(c, &it->replicate));
    if (it->replicate >= PROTO_MAX_REPLICATES)
        FIELD_FAIL("replicate", PROTO_ELIMIT, "%lu, limit %lu", (unsigned long)it->replicate,
                   (unsigned long)PROTO_MAX_REPLICATES - 1);
    FIELD("genome", s_read_bin(c, c->lim.genome_bytes, &it->genome, &it->genome_len));
cleanup:
    return rc;
}

static int s_submit(s_cursor_t *c, proto_submit_t *s)
{
    int rc;
    uint32_t n = 0;
    FIELD("run_id", s_read_str(c, c->lim.name_bytes, &s->run_id));
    FIELD("run_seed", s_read_u64(c, &s->run_seed));
    FIELD("seed_mode", s_read_u32(c, &s->seed_mode));
    if (s->seed_mode != PROTO_SEED_GENOME && s->seed_mode != PROTO_SEED_COMMON)
        FIELD_FAIL("seed_mode", PROTO_EVALUE, "%lu, expected 0 (genome) or 1 (common)",
                   (unsigned long)s->seed_mode);
    FIELD("flags", s_read_u32(c, &s->flags));
    FIELD("timeout_ms", s_read_u32(c, &s->timeout_ms));
    FIELD("attempts", s_read_u32(c, &s->attempts));
    FIELD("batch_tag", s_read_u64(c, &s->batch_tag));
    FIELD("plugin", s_read_str(c, c->lim.name_bytes, &s->plugin));
    FIELD("params", s_read_str(c, c->lim.params_bytes, &s->params));
    size_t old = s_path_push(c, ".items");
    /* an item is at least 5 bytes: fixarray, tag, replicate, bin 8 header */
    if ((rc = s_read_array(c, c->lim.batch_items, 5, &n)) ||
        (rc = s_alloc(c, (void **)&s->items, n, sizeof *s->items)))
        goto cleanup;
    s->n_items = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_item(c, &s->items[i]));
    s_path_pop(c, old);
    FIELD("weight", s_read_u32(c, &s->weight));
    if (s->weight < 1 || s->weight > PROTO_MAX_WEIGHT)
        FIELD_FAIL("weight", PROTO_EVALUE, "%lu, expected 1 to %lu", (unsigned long)s->weight,
                   (unsigned long)PROTO_MAX_WEIGHT);
cleanup:
    return rc;
}

static int s_ack(s_cursor_t *c, proto_ack_t *a)
{
    int rc;
    FIELD("run_id", s_read_str(c, c->lim.name_bytes, &a->run_id));
    FIELD("tags", s_read_u64_array(c, PROTO_MAX_LIST, &a->n_tags, &a->tags));
cleanup:
    return rc;
}

static int s_accepted(s_cursor_t *c, proto_accepted_t *a)
{
    int rc;
    FIELD("run_id", s_read_str(c, c->lim.name_bytes, &a->run_id));
    FIELD("batch_tag", s_read_u64(c, &a->batch_tag));
    FIELD("n_accepted", s_read_u32(c, &a->n_accepted));
cleanup:
    return rc;
}

static int s_result(s_cursor_t *c, proto_result_t *r)
{
    int rc;
    if ((rc = s_read_tuple(c, 12)))
        goto cleanup;
    FIELD("tag", s_read_u64(c, &r->tag));
    FIELD("status", s_read_status(c, &r->status));
    FIELD("cached", s_read_bool(c, &r->cached));
    FIELD("seed", s_read_u64(c, &r->seed));
    FIELD("key", s_read_bin_fixed(c, r->key, PROTO_KEY_BYTES));
    FIELD("fitness", s_read_f64_array(c, c->lim.objectives, &r->n_fitness, &r->fitness, 0));
    FIELD("error", s_read_str(c, c->lim.error_bytes, &r->error));
    FIELD("worker", s_read_str(c, c->lim.name_bytes, &r->worker));
    FIELD("host", s_read_str(c, c->lim.name_bytes, &r->host));
    FIELD("cpu_seconds", s_read_f64_measure(c, &r->cpu_seconds));
    FIELD("peak_rss_kb", s_read_u64(c, &r->peak_rss_kb));
    FIELD("finished_at", s_read_f64_measure(c, &r->finished_at));
cleanup:
    return rc;
}

static int s_results(s_cursor_t *c, proto_results_t *r)
{
    int rc;
    uint32_t n = 0;
    FIELD("run_id", s_read_str(c, c->lim.name_bytes, &r->run_id));
    size_t old = s_path_push(c, ".results");
    /* a result is at least 1 + 1 + 1 + 1 + 1 + 34 + 1 + 1 + 1 + 1 + 9 + 1 + 9 bytes */
    if ((rc = s_read_array(c, c->lim.batch_items, 62, &n)) ||
        (rc = s_alloc(c, (void **)&r->results, n, sizeof *r->results)))
        goto cleanup;
    r->n_results = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_result(c, &r->results[i]));
    s_path_pop(c, old);
cleanup:
    return rc;
}

static int s_refused(s_cursor_t *c, proto_refused_t *r)
{
    int rc;
    FIELD("code", s_read_u32(c, &r->code));
    FIELD("batch_tag", s_read_u64(c, &r->batch_tag));
    FIELD("run_id", s_read_str(c, c->lim.name_bytes, &r->run_id));
    FIELD("text", s_read_str(c, c->lim.error_bytes, &r->text));
    FIELD("has_tag", s_read_bool(c, &r->has_tag));
    FIELD("tag", s_read_u64(c, &r->tag));
cleanup:
    return rc;
}

static int s_worker_info(s_cursor_t *c, proto_worker_info_t *w)
{
    int rc;
    uint32_t n_medians = 0;
    if ((rc = s_read_tuple(c, 9)))
        goto cleanup;
    FIELD("name", s_read_str(c, c->lim.name_bytes, &w->name));
    FIELD("host", s_read_str(c, c->lim.name_bytes, &w->host));
    FIELD("arch", s_read_str(c, c->lim.name_bytes, &w->arch));
    FIELD("slots", s_read_u32(c, &w->slots));
    FIELD("busy", s_read_u32(c, &w->busy));
    FIELD("plugins", s_read_str_array(c, PROTO_MAX_PLUGINS, s_plugin_ref_limit(c), &w->n_plugins,
                                      &w->plugins));
    FIELD("speed", s_read_speed(c, &w->speed));
    FIELD("state", s_read_str(c, c->lim.name_bytes + 16, &w->state)); /* "paused: " WHY */
    FIELD("medians", s_read_f64_array(c, PROTO_MAX_PLUGINS, &n_medians, &w->medians, 1));
    if (n_medians != w->n_plugins)
        FIELD_FAIL("medians", PROTO_EVALUE, "%u values for %u plugins", n_medians, w->n_plugins);
cleanup:
    return rc;
}

static int s_run_info(s_cursor_t *c, proto_run_info_t *r)
{
    int rc;
    if ((rc = s_read_tuple(c, 7)))
        goto cleanup;
    FIELD("run_id", s_read_str(c, c->lim.name_bytes, &r->run_id));
    FIELD("queued", s_read_u64(c, &r->queued));
    FIELD("running", s_read_u64(c, &r->running));
    FIELD("done", s_read_u64(c, &r->done));
    FIELD("evaluated", s_read_u64(c, &r->evaluated));
    FIELD("cached", s_read_u64(c, &r->cached));
    FIELD("failed", s_read_u64(c, &r->failed));
cleanup:
    return rc;
}

static int s_status(s_cursor_t *c, proto_status_t *st)
{
    int rc;
    uint32_t n = 0;
    size_t old = s_path_push(c, ".workers");
    /* a worker info is at least 1 + 5 + 1 + 9 + 1 + 1 bytes, a run info 5 */
    if ((rc = s_read_array(c, PROTO_MAX_LIST, 18, &n)) ||
        (rc = s_alloc(c, (void **)&st->workers, n, sizeof *st->workers)))
        goto cleanup;
    st->n_workers = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_worker_info(c, &st->workers[i]));
    s_path_pop(c, old);
    old = s_path_push(c, ".runs");
    if ((rc = s_read_array(c, PROTO_MAX_LIST, 5, &n)) ||
        (rc = s_alloc(c, (void **)&st->runs, n, sizeof *st->runs)))
        goto cleanup;
    st->n_runs = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_run_info(c, &st->runs[i]));
    s_path_pop(c, old);
    FIELD("warnings", s_read_str_array(c, PROTO_MAX_LIST, c->lim.error_bytes, &st->n_warnings,
                                       &st->warnings));
cleanup:
    return rc;
}

static int s_plugin_info(s_cursor_t *c, proto_plugin_info_t *p)
{
    int rc;
    if ((rc = s_read_tuple(c, 7)))
        goto cleanup;
    FIELD("name", s_read_str(c, c->lim.name_bytes, &p->name));
    FIELD("version", s_read_str(c, c->lim.name_bytes, &p->version));
    FIELD("objectives", s_read_u32(c, &p->objectives));
    if (p->objectives > c->lim.objectives)
        FIELD_FAIL("objectives", PROTO_ELIMIT, "%lu, limit %lu", (unsigned long)p->objectives,
                   (unsigned long)c->lim.objectives);
    FIELD("flags", s_read_u32(c, &p->flags));
    FIELD("digest", s_read_bin_fixed(c, p->digest, PROTO_DIGEST_BYTES));
    FIELD("seed_params", s_read_str_array(c, PROTO_MAX_SEED_PARAMS, c->lim.name_bytes,
                                          &p->n_seed_params, &p->seed_params));
    FIELD("param_defaults", s_read_str(c, c->lim.params_bytes, &p->param_defaults));
cleanup:
    return rc;
}

static int s_hello(s_cursor_t *c, proto_hello_t *h)
{
    int rc;
    uint32_t n = 0;
    FIELD("name", s_read_str(c, c->lim.name_bytes, &h->name));
    FIELD("host", s_read_str(c, c->lim.name_bytes, &h->host));
    FIELD("arch", s_read_str(c, c->lim.name_bytes, &h->arch));
    FIELD("slots", s_read_u32(c, &h->slots));
    size_t old = s_path_push(c, ".plugins");
    /* a plugin info is at least 1 + 1 + 1 + 1 + 1 + 34 + 1 + 1 bytes */
    if ((rc = s_read_array(c, PROTO_MAX_PLUGINS, 41, &n)) ||
        (rc = s_alloc(c, (void **)&h->plugins, n, sizeof *h->plugins)))
        goto cleanup;
    h->n_plugins = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_plugin_info(c, &h->plugins[i]));
    s_path_pop(c, old);
    FIELD("speed", s_read_speed(c, &h->speed));
cleanup:
    return rc;
}

static int s_outcome(s_cursor_t *c, proto_outcome_t *o)
{
    int rc;
    if ((rc = s_read_tuple(c, 7)))
        goto cleanup;
    FIELD("job_id", s_read_u64(c, &o->job_id));
    FIELD("status", s_read_status(c, &o->status));
    FIELD("fitness", s_read_f64_array(c, c->lim.objectives, &o->n_fitness, &o->fitness, 0));
    FIELD("cpu_seconds", s_read_f64_measure(c, &o->cpu_seconds));
    FIELD("peak_rss_kb", s_read_u64(c, &o->peak_rss_kb));
    FIELD("error", s_read_str(c, c->lim.error_bytes, &o->error));
    FIELD("wall_seconds", s_read_f64_measure(c, &o->wall_seconds));
cleanup:
    return rc;
}

static int s_done(s_cursor_t *c, proto_done_t *d)
{
    int rc;
    uint32_t n = 0;
    FIELD("credits", s_read_u32(c, &d->credits));
    size_t old = s_path_push(c, ".outcomes");
    /* an outcome is at least 1 + 1 + 1 + 1 + 9 + 1 + 1 + 9 bytes */
    if ((rc = s_read_array(c, c->lim.batch_items, 24, &n)) ||
        (rc = s_alloc(c, (void **)&d->outcomes, n, sizeof *d->outcomes)))
        goto cleanup;
    d->n_outcomes = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_outcome(c, &d->outcomes[i]));
    s_path_pop(c, old);
cleanup:
    return rc;
}

static int s_hand_back(s_cursor_t *c, proto_hand_back_t *hb)
{
    int rc;
    FIELD("reason", s_read_str(c, c->lim.name_bytes, &hb->reason));
    FIELD("job_ids", s_read_u64_array(c, c->lim.batch_items, &hb->n_jobs, &hb->job_ids));
    FIELD("draining", s_read_bool(c, &hb->draining));
cleanup:
    return rc;
}

static int s_job(s_cursor_t *c, proto_job_t *j)
{
    int rc;
    if ((rc = s_read_tuple(c, 6)))
        goto cleanup;
    FIELD("job_id", s_read_u64(c, &j->job_id));
    FIELD("plugin", s_read_str(c, c->lim.name_bytes, &j->plugin));
    FIELD("params", s_read_str(c, c->lim.params_bytes, &j->params));
    FIELD("seed", s_read_u64(c, &j->seed));
    FIELD("timeout_ms", s_read_u32(c, &j->timeout_ms));
    FIELD("genome", s_read_bin(c, c->lim.genome_bytes, &j->genome, &j->genome_len));
cleanup:
    return rc;
}

static int s_jobs(s_cursor_t *c, proto_jobs_t *j)
{
    int rc;
    uint32_t n = 0;
    size_t old = s_path_push(c, ".jobs");
    /* a job is at least 1 + 1 + 1 + 1 + 1 + 1 + 2 bytes */
    if ((rc = s_read_array(c, c->lim.batch_items, 8, &n)) ||
        (rc = s_alloc(c, (void **)&j->jobs, n, sizeof *j->jobs)))
        goto cleanup;
    j->n_jobs = n;
    for (uint32_t i = 0; i < n; i++)
        ELEM(i, s_job(c, &j->jobs[i]));
    s_path_pop(c, old);
cleanup:
    return rc;
}

/* A caller's limits, each clamped to its ceiling; 0 means the ceiling. */
static uint32_t s_clamp(uint32_t v, uint32_t ceiling)
{
    return v == 0 || v > ceiling ? ceiling : v;
}

int proto_msg_decode(const uint8_t *buf, size_t len, const proto_limits_t *limits,
                     proto_msg_t **out, proto_err_t *err)
{
    int rc;
    proto_msg_t *m = NULL;
    s_cursor_t cur = {.buf = buf, .len = len, .err = err};
    s_cursor_t *c = &cur;
    proto_limits_t lim = limits ? *limits : proto_limits_default();

    c->lim.message_bytes = s_clamp(lim.message_bytes, PROTO_MAX_MESSAGE_BYTES);
    c->lim.genome_bytes = s_clamp(lim.genome_bytes, PROTO_MAX_GENOME_BYTES);
    c->lim.batch_items = s_clamp(lim.batch_items, PROTO_MAX_BATCH_ITEMS);
    c->lim.objectives = s_clamp(lim.objectives, PROTO_MAX_OBJECTIVES);
    c->lim.name_bytes = s_clamp(lim.name_bytes, PROTO_MAX_NAME_BYTES);
    c->lim.params_bytes = s_clamp(lim.params_bytes, PROTO_MAX_PARAMS_BYTES);
    c->lim.error_bytes = s_clamp(lim.error_bytes, PROTO_MAX_ERROR_BYTES);
    if (err) {
        err->code = PROTO_OK;
        err->text[0] = '\0';
    }
    if (out)
        *out = NULL;
    if (!out || (!buf && len > 0)) {
        rc = s_fail(c, PROTO_EVALUE, "no input or no output pointer");
        goto cleanup;
    }
    if (len > c->lim.message_bytes) {
        rc = s_fail(c, PROTO_ELIMIT, "%zu bytes, limit %lu", len,
                    (unsigned long)c->lim.message_bytes);
        goto cleanup;
    }

    /* Header: [version, type, ...]. The version is checked before anything
     * else so a peer speaking another version gets PROTO_EVERSION, not a
     * confusing count or type error. */
    uint8_t b = 0;
    uint64_t count = 0, version = 0, type = 0;
    s_path_push(c, "message"); /* until the type is known */
    if ((rc = s_take_byte(c, &b)))
        goto cleanup;
    if (b >= 0x90 && b <= 0x9f)
        count = b & 0x0f;
    else if (b == 0xdc || b == 0xdd) {
        if ((rc = s_take_be(c, b == 0xdc ? 2 : 4, &count)))
            goto cleanup;
    } else {
        rc = s_fail(c, PROTO_ETYPE, "%s, expected array", s_type_of(b));
        goto cleanup;
    }
    if (count < 2) {
        rc = s_fail(c, PROTO_ECOUNT, "%llu elements, expected at least 2 (version, type)",
                    (unsigned long long)count);
        goto cleanup;
    }
    FIELD("version", s_read_u64(c, &version));
    if (version != PROTO_VERSION) {
        rc = s_fail(c, PROTO_EVERSION, "version %llu, we speak %d", (unsigned long long)version,
                    PROTO_VERSION);
        goto cleanup;
    }
    FIELD("type", s_read_u64(c, &type));
    int nfields = type <= UINT32_MAX ? proto_msg_field_count((uint32_t)type) : -1;
    if (nfields < 0) {
        rc = s_fail(c, PROTO_EUNKNOWN, "unknown message type %llu", (unsigned long long)type);
        goto cleanup;
    }
    s_path_pop(c, 0);
    s_path_push(c, "%s", proto_type_name((int)type));
    if (count != 2 + (uint64_t)nfields) {
        rc = s_fail(c, PROTO_ECOUNT, "%llu elements, expected %d", (unsigned long long)count,
                    2 + nfields);
        goto cleanup;
    }

    m = calloc(1, sizeof *m);
    if (!m) {
        rc = s_fail(c, PROTO_ENOMEM, "out of memory");
        goto cleanup;
    }
    m->type = (uint32_t)type;
    switch (m->type) {
    case PROTO_SUBMIT: rc = s_submit(c, &m->u.submit); break;
    case PROTO_ACK: rc = s_ack(c, &m->u.ack); break;
    case PROTO_ACCEPTED: rc = s_accepted(c, &m->u.accepted); break;
    case PROTO_RESULTS: rc = s_results(c, &m->u.results); break;
    case PROTO_REFUSED: rc = s_refused(c, &m->u.refused); break;
    case PROTO_STATUS: rc = s_status(c, &m->u.status); break;
    case PROTO_HELLO: rc = s_hello(c, &m->u.hello); break;
    case PROTO_CREDIT: FIELD("credits", s_read_u32(c, &m->u.credit.credits)); break;
    case PROTO_DONE: rc = s_done(c, &m->u.done); break;
    case PROTO_HAND_BACK: rc = s_hand_back(c, &m->u.hand_back); break;
    case PROTO_JOBS: rc = s_jobs(c, &m->u.jobs); break;
    case PROTO_CANCEL:
        FIELD("job_ids", s_read_u64_array(c, c->lim.batch_items, &m->u.cancel.n_jobs,
                                          &m->u.cancel.job_ids));
        break;
    default: rc = PROTO_OK; break; /* no fields */
    }
    if (rc)
        goto cleanup;
    if (s_left(c) > 0) {
        rc = s_fail(c, PROTO_ETRAILING, "%zu bytes after the message", s_left(c));
        goto cleanup;
    }
    *out = m;
    m = NULL;
cleanup:
    proto_msg_destroy(&m);
    return rc;
}
