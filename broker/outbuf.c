/* outbuf.c: the listener's text buffer and escapings (outbuf.h). */
#include "outbuf.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"

static void s_reserve(broker_outbuf_t *self, size_t more)
{
    if (self->len + more + 1 <= self->cap)
        return;
    size_t cap = self->cap ? self->cap : 4096;
    while (cap < self->len + more + 1)
        cap *= 2;
    self->data = common_xrealloc(self->data, cap, 1);
    self->cap = cap;
}

static void s_put(broker_outbuf_t *self, const char *s, size_t n)
{
    s_reserve(self, n);
    memcpy(self->data + self->len, s, n);
    self->len += n;
    self->data[self->len] = '\0';
}

void broker_outbuf_printf(broker_outbuf_t *self, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    if (n <= 0)
        return;
    s_reserve(self, (size_t)n);
    va_start(ap, fmt);
    vsnprintf(self->data + self->len, (size_t)n + 1, fmt, ap);
    va_end(ap);
    self->len += (size_t)n;
}

size_t broker_outbuf_utf8_len(const unsigned char *s, size_t n)
{
    unsigned c = s[0];
    if (c < 0x80)
        return 1;
    size_t len;
    unsigned lo = 0x80, hi = 0xbf; /* bounds of the second byte */
    if (c >= 0xc2 && c <= 0xdf)
        len = 2;
    else if (c >= 0xe0 && c <= 0xef) {
        len = 3;
        if (c == 0xe0)
            lo = 0xa0; /* no overlong forms */
        if (c == 0xed)
            hi = 0x9f; /* no surrogates */
    } else if (c >= 0xf0 && c <= 0xf4) {
        len = 4;
        if (c == 0xf0)
            lo = 0x90;
        if (c == 0xf4)
            hi = 0x8f; /* at most U+10FFFF */
    } else {
        return 0;
    }
    if (n < len || s[1] < lo || s[1] > hi)
        return 0;
    for (size_t i = 2; i < len; i++)
        if (s[i] < 0x80 || s[i] > 0xbf)
            return 0;
    return len;
}

/* Calls out for each piece of s: a valid multi-byte sequence as it is, an
 * ASCII byte through esc, anything else as '?'. */
static void s_escaped(broker_outbuf_t *self, const char *s,
                      void (*esc)(broker_outbuf_t *, unsigned char))
{
    const unsigned char *p = (const unsigned char *)(s ? s : "");
    size_t n = strlen((const char *)p);
    while (n > 0) {
        size_t k = broker_outbuf_utf8_len(p, n);
        if (k == 0) {
            s_put(self, "?", 1);
            k = 1;
        } else if (k == 1) {
            esc(self, p[0]);
        } else {
            s_put(self, (const char *)p, k);
        }
        p += k;
        n -= k;
    }
}

static void s_label_byte(broker_outbuf_t *self, unsigned char c)
{
    if (c == '\\')
        s_put(self, "\\\\", 2);
    else if (c == '"')
        s_put(self, "\\\"", 2);
    else if (c == '\n')
        s_put(self, "\\n", 2);
    else if (c < 0x20 || c == 0x7f)
        s_put(self, "?", 1);
    else
        s_put(self, (const char *)&c, 1);
}

static void s_html_byte(broker_outbuf_t *self, unsigned char c)
{
    switch (c) {
    case '&':
        s_put(self, "&amp;", 5);
        break;
    case '<':
        s_put(self, "&lt;", 4);
        break;
    case '>':
        s_put(self, "&gt;", 4);
        break;
    case '"':
        s_put(self, "&quot;", 6);
        break;
    case '\'':
        s_put(self, "&#39;", 5);
        break;
    default:
        if (c < 0x20 || c == 0x7f)
            s_put(self, "?", 1);
        else
            s_put(self, (const char *)&c, 1);
    }
}

void broker_outbuf_label(broker_outbuf_t *self, const char *s)
{
    s_escaped(self, s, s_label_byte);
}

void broker_outbuf_html(broker_outbuf_t *self, const char *s)
{
    s_escaped(self, s, s_html_byte);
}

char *broker_outbuf_take(broker_outbuf_t *self, size_t *len)
{
    s_reserve(self, 0);
    char *out = self->data;
    if (len)
        *len = self->len;
    memset(self, 0, sizeof *self);
    return out;
}
