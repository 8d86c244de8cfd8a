/* http.c: the broker's metrics listener (http.h). libmicrohttpd does the
 * HTTP (a well-kept parser with limits of its own, from Debian); this file
 * only chooses the address, the limits, the paths and the replies. */
#include "http.h"

#include <arpa/inet.h>
#include <errno.h>
#include <microhttpd.h>
#include <netinet/in.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/log.h"
#include "core.h"
#include "metrics.h"
#include "status_page.h"

struct broker_http {
    struct MHD_Daemon *daemon;
    broker_t *b;
    int fd;
};

int broker_http_parse(const char *text, struct sockaddr_storage *addr, int *loopback, char *err,
                      size_t errlen)
{
    char host[64] = BROKER_HTTP_DEFAULT_HOST;
    const char *port = text;
    if (!text || !*text) {
        snprintf(err, errlen, "--http needs PORT or HOST:PORT");
        return -1;
    }
    const char *colon = strrchr(text, ':');
    if (colon) {
        size_t n = (size_t)(colon - text);
        const char *h = text;
        if (n >= 2 && text[0] == '[' && text[n - 1] == ']') {
            h++;
            n -= 2;
        }
        if (n == 0 || n >= sizeof host) {
            snprintf(err, errlen, "--http: '%s' has no usable host before the port", text);
            return -1;
        }
        memcpy(host, h, n);
        host[n] = '\0';
        port = colon + 1;
    }
    char *end = NULL;
    errno = 0;
    long p = strtol(port, &end, 10);
    if (errno || !end || *end || end == port || p < 0 || p > 65535) {
        snprintf(err, errlen, "--http: the port must be a number from 0 to 65535, got '%s'",
                 port);
        return -1;
    }
    if (strcmp(host, "localhost") == 0)
        snprintf(host, sizeof host, "127.0.0.1");
    memset(addr, 0, sizeof *addr);
    struct sockaddr_in *v4 = (struct sockaddr_in *)addr;
    struct sockaddr_in6 *v6 = (struct sockaddr_in6 *)addr;
    if (inet_pton(AF_INET, host, &v4->sin_addr) == 1) {
        v4->sin_family = AF_INET;
        v4->sin_port = htons((uint16_t)p);
        *loopback = (ntohl(v4->sin_addr.s_addr) >> 24) == 127;
    } else if (inet_pton(AF_INET6, host, &v6->sin6_addr) == 1) {
        v6->sin6_family = AF_INET6;
        v6->sin6_port = htons((uint16_t)p);
        *loopback = IN6_IS_ADDR_LOOPBACK(&v6->sin6_addr);
    } else {
        snprintf(err, errlen,
                 "--http: '%s' is not an IP address (give a numeric address or localhost)", host);
        return -1;
    }
    return 0;
}

static void s_log(void *cls, const char *fmt, va_list ap)
{
    (void)cls;
    char text[512];
    vsnprintf(text, sizeof text, fmt, ap);
    size_t n = strlen(text);
    while (n && (text[n - 1] == '\n' || text[n - 1] == '\r'))
        text[--n] = '\0';
    LOG_DEBUG("http listener: %s", text);
}

static enum MHD_Result s_reply(struct MHD_Connection *c, unsigned code, const char *type,
                               char *body, size_t len)
{
    struct MHD_Response *r = MHD_create_response_from_buffer(len, body, MHD_RESPMEM_MUST_FREE);
    if (!r) {
        free(body);
        return MHD_NO;
    }
    MHD_add_response_header(r, MHD_HTTP_HEADER_CONTENT_TYPE, type);
    MHD_add_response_header(r, MHD_HTTP_HEADER_CACHE_CONTROL, "no-store");
    MHD_add_response_header(r, "X-Content-Type-Options", "nosniff");
    /* No script, no outside resource, even if escaping ever missed a spot. */
    MHD_add_response_header(r, "Content-Security-Policy",
                            "default-src 'none'; style-src 'unsafe-inline'");
    if (code == MHD_HTTP_METHOD_NOT_ALLOWED)
        MHD_add_response_header(r, MHD_HTTP_HEADER_ALLOW, "GET, HEAD");
    enum MHD_Result rc = MHD_queue_response(c, code, r);
    MHD_destroy_response(r);
    return rc;
}

static enum MHD_Result s_answer(void *cls, struct MHD_Connection *c, const char *url,
                                const char *method, const char *version, const char *upload,
                                size_t *upload_len, void **req)
{
    broker_http_t *self = cls;
    (void)version;
    (void)upload;
    (void)upload_len;
    (void)req;
    /* Answered on the first call, after the headers: a body sent with the
     * request is never read (libmicrohttpd closes the connection after). */
    int get = strcmp(method, MHD_HTTP_METHOD_GET) == 0;
    int head = strcmp(method, MHD_HTTP_METHOD_HEAD) == 0;
    LOG_DEBUG("http listener: %s %s", method, url);
    if (!get && !head)
        return s_reply(c, MHD_HTTP_METHOD_NOT_ALLOWED, "text/plain; charset=utf-8",
                       common_xstrdup("only GET and HEAD\n"), 18);
    if (strcmp(url, "/metrics") == 0) {
        size_t len = 0;
        char *text = broker_metrics_text(self->b, &len);
        return s_reply(c, MHD_HTTP_OK, "text/plain; version=0.0.4; charset=utf-8", text, len);
    }
    if (strcmp(url, "/") == 0) {
        size_t len = 0;
        char *html = broker_status_page_html(self->b, &len);
        return s_reply(c, MHD_HTTP_OK, "text/html; charset=utf-8", html, len);
    }
    static const char s_missing[] = "not found: the broker serves / and /metrics\n";
    return s_reply(c, MHD_HTTP_NOT_FOUND, "text/plain; charset=utf-8",
                   common_xstrdup(s_missing), sizeof s_missing - 1);
}

broker_http_t *broker_http_new(broker_t *b, const char *address, char *url, size_t url_len)
{
    struct sockaddr_storage addr;
    int loopback = 0;
    char err[256];
    if (broker_http_parse(address, &addr, &loopback, err, sizeof err) != 0) {
        LOG_ERROR("%s", err);
        return NULL;
    }
    broker_http_t *self = common_xcalloc(1, sizeof *self);
    self->b = b;
    self->fd = -1;
    unsigned flags = MHD_USE_EPOLL | MHD_USE_ERROR_LOG;
    if (addr.ss_family == AF_INET6)
        flags |= MHD_USE_IPv6;
    /* Port 0 asks the kernel for a free one; read back below. */
    uint16_t port = ntohs(addr.ss_family == AF_INET6 ? ((struct sockaddr_in6 *)&addr)->sin6_port
                                                     : ((struct sockaddr_in *)&addr)->sin_port);
    self->daemon = MHD_start_daemon(
        flags, port, NULL, NULL, s_answer, self, MHD_OPTION_SOCK_ADDR, (struct sockaddr *)&addr,
        MHD_OPTION_CONNECTION_LIMIT, (unsigned)BROKER_HTTP_CONNECTIONS,
        MHD_OPTION_CONNECTION_TIMEOUT, (unsigned)BROKER_HTTP_TIMEOUT_S,
        MHD_OPTION_CONNECTION_MEMORY_LIMIT, (size_t)BROKER_HTTP_REQUEST_BYTES,
        MHD_OPTION_LISTEN_BACKLOG_SIZE, (unsigned)BROKER_HTTP_CONNECTIONS,
        MHD_OPTION_EXTERNAL_LOGGER, s_log, NULL, MHD_OPTION_END);
    if (!self->daemon) {
        LOG_ERROR("cannot listen for http on %s: %s", address, strerror(errno));
        free(self);
        return NULL;
    }
    const union MHD_DaemonInfo *fd = MHD_get_daemon_info(self->daemon, MHD_DAEMON_INFO_EPOLL_FD);
    const union MHD_DaemonInfo *bound =
        MHD_get_daemon_info(self->daemon, MHD_DAEMON_INFO_BIND_PORT);
    if (!fd || fd->epoll_fd < 0) {
        LOG_ERROR("cannot listen for http on %s: no epoll descriptor from libmicrohttpd",
                  address);
        MHD_stop_daemon(self->daemon);
        free(self);
        return NULL;
    }
    self->fd = fd->epoll_fd;
    if (bound && bound->port)
        port = bound->port;
    char host[INET6_ADDRSTRLEN] = "";
    if (addr.ss_family == AF_INET6)
        inet_ntop(AF_INET6, &((struct sockaddr_in6 *)&addr)->sin6_addr, host, sizeof host);
    else
        inet_ntop(AF_INET, &((struct sockaddr_in *)&addr)->sin_addr, host, sizeof host);
    snprintf(url, url_len, addr.ss_family == AF_INET6 ? "http://[%s]:%u" : "http://%s:%u", host,
             (unsigned)port);
    LOG_INFO("serving the status page on %s/ and metrics on %s/metrics", url, url);
    if (!loopback)
        LOG_WARN("the http listener %s is not on loopback: anyone who can reach it reads the "
                 "metrics without credentials (run ids, worker and host names); prefer "
                 "loopback and an SSH tunnel (README, \"Metrics\")",
                 url);
    return self;
}

int broker_http_fd(const broker_http_t *self)
{
    return self ? self->fd : -1;
}

long broker_http_timeout_ms(broker_http_t *self)
{
    MHD_UNSIGNED_LONG_LONG ms = 0;
    if (!self || MHD_get_timeout(self->daemon, &ms) != MHD_YES)
        return -1;
    return ms > 60000 ? 60000 : (long)ms;
}

static unsigned s_open_connections(broker_http_t *self)
{
    const union MHD_DaemonInfo *info =
        MHD_get_daemon_info(self->daemon, MHD_DAEMON_INFO_CURRENT_CONNECTIONS);
    return info ? info->num_connections : 0;
}

void broker_http_run(broker_http_t *self)
{
    if (!self)
        return;
    /* libmicrohttpd (0.9.75) closes connections at the end of a run but
     * takes its listener back into the epoll set (dropped while at the
     * connection limit) only at the start of the next one, and nothing wakes
     * us for that: requests queued in the kernel would wait for the broker's
     * next turn for another reason. So run again while a run closed some;
     * each extra run is a non-blocking epoll_wait. Bounded: at most one run
     * per connection slot. A connection whose peer closed before it was
     * accepted is another quirk of that version: its request bytes and the
     * close are read as one short read, taken as drained, and the close is
     * seen only at the connection time-out (BROKER_HTTP_TIMEOUT_S), the bound
     * a slow client gets too (tests/integration/test_metrics.py). */
    unsigned before = s_open_connections(self);
    for (int i = 0; i <= BROKER_HTTP_CONNECTIONS; i++) {
        (void)MHD_run(self->daemon);
        unsigned after = s_open_connections(self);
        if (after >= before)
            break;
        before = after;
    }
}

void broker_http_destroy(broker_http_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    broker_http_t *self = *self_p;
    MHD_stop_daemon(self->daemon);
    free(self);
    *self_p = NULL;
}
