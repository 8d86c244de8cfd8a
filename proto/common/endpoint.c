/* endpoint.c: the local-endpoint test (see endpoint.h). Pure string work. */
#include "endpoint.h"

#include <stdlib.h>
#include <string.h>

/* "127.a.b.c" with each part a decimal 0..255 and exactly four parts. */
static int s_loopback_v4(const char *host, size_t n)
{
    if (n < 9 || memcmp(host, "127.", 4) != 0)
        return 0;
    int parts = 0;
    size_t i = 0;
    while (i < n) {
        size_t start = i;
        unsigned v = 0;
        while (i < n && host[i] >= '0' && host[i] <= '9' && i - start < 3)
            v = v * 10 + (unsigned)(host[i++] - '0');
        if (i == start || v > 255)
            return 0;
        parts++;
        if (i == n)
            break;
        if (host[i] != '.')
            return 0;
        i++;
        if (i == n)
            return 0;
    }
    return parts == 4;
}

int common_endpoint_is_local(const char *endpoint)
{
    if (!endpoint)
        return 0;
    if (strncmp(endpoint, "ipc://", 6) == 0 || strncmp(endpoint, "inproc://", 9) == 0)
        return 1;
    if (strncmp(endpoint, "tcp://", 6) != 0)
        return 0;
    const char *host = endpoint + 6;
    if (strchr(host, ';'))
        return 0;
    const char *colon = strrchr(host, ':');
    if (!colon || colon == host)
        return 0;
    size_t n = (size_t)(colon - host);
    if (n == 5 && memcmp(host, "[::1]", 5) == 0)
        return 1;
    if (n == 9 && memcmp(host, "localhost", 9) == 0)
        return 1;
    return s_loopback_v4(host, n);
}
