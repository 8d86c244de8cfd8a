/* outbuf.h: a growing text buffer for the listener's pages (metrics.c,
 * status_page.c), with the two escapings they need for text that comes from
 * the network (run ids, worker and host names): OpenMetrics label values
 * and HTML. Both also replace what is not valid UTF-8 (RFC 3629) and control
 * characters with '?', since the protocol only bounds those strings' bytes.
 * Internal to the broker; daemon code, so out of memory aborts (alloc.h). */
#ifndef BROKER_OUTBUF_H
#define BROKER_OUTBUF_H

#include <stddef.h>

typedef struct {
    char *data;
    size_t len, cap;
} broker_outbuf_t;

/* Appends formatted text (printf). */
void broker_outbuf_printf(broker_outbuf_t *self, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));
/* Appends s as the inside of a quoted label value: \ " and newline escaped
 * as the OpenMetrics and Prometheus text formats require. */
void broker_outbuf_label(broker_outbuf_t *self, const char *s);
/* Appends s with & < > " ' as character references (HTML, common practice). */
void broker_outbuf_html(broker_outbuf_t *self, const char *s);
/* The text, NUL-terminated, and its length; the caller frees it (free()).
 * The buffer is empty afterwards. */
char *broker_outbuf_take(broker_outbuf_t *self, size_t *len);

/* Bytes of the valid UTF-8 sequence (RFC 3629: no overlong forms, no
 * surrogates, at most U+10FFFF) starting at s, 0 when there is none. s has
 * n bytes left (n >= 1). */
size_t broker_outbuf_utf8_len(const unsigned char *s, size_t n);

#endif
