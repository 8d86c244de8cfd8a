/* http.h: the broker's opt-in HTTP listener (--http) serving the metrics
 * page at /metrics and the status page at / (status_page.h). libmicrohttpd without threads of its own: its epoll
 * descriptor sits in the broker's zmq_poll set and broker_http_run is called
 * on the broker's thread, so the page reads broker state with no locking.
 * Only GET and HEAD; a bounded number of connections, request sizes and
 * time-outs. Internal to the broker. Not here: the pages' text. */
#ifndef BROKER_HTTP_H
#define BROKER_HTTP_H

#include <stddef.h>
#include <sys/socket.h>

struct broker;
typedef struct broker_http broker_http_t;

#define BROKER_HTTP_DEFAULT_HOST "127.0.0.1"
#define BROKER_HTTP_CONNECTIONS 16   /* open at once; more wait in the kernel's queue */
#define BROKER_HTTP_TIMEOUT_S 10     /* an idle or slow connection is closed (also one
                                      * whose close libmicrohttpd missed: http.c) */
#define BROKER_HTTP_REQUEST_BYTES (32u * 1024u) /* request line and headers */

/* Parses "PORT", "HOST:PORT" (IPv4 literal or localhost) or "[IPv6]:PORT"
 * into addr. *loopback: the address is a loopback one. Returns 0, or -1
 * with err saying what was wrong. */
int broker_http_parse(const char *text, struct sockaddr_storage *addr, int *loopback, char *err,
                      size_t errlen);

/* Starts listening on address (as broker_http_parse; text already checked
 * or checked again here). Writes "http://HOST:PORT" to url. Returns the
 * listener (caller destroys it), or NULL after logging why. */
broker_http_t *broker_http_new(struct broker *b, const char *address, char *url, size_t url_len);

/* The descriptor to poll for reading (libmicrohttpd's epoll set). */
int broker_http_fd(const broker_http_t *self);
/* Milliseconds until broker_http_run is due anyway (connection time-outs,
 * work left over), or -1 for none. */
long broker_http_timeout_ms(broker_http_t *self);
/* Serves what is ready; never blocks. Broker thread only. */
void broker_http_run(broker_http_t *self);
/* Closes every connection and the listener. Accepts NULL. */
void broker_http_destroy(broker_http_t **self_p);

#endif
