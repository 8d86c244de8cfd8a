/* textfile.c: bounded reading of a small text file and its split into
 * content lines (see textfile.h). Owns the open/stat/read loop and the line
 * rules every format of ours shares (numbering, trimming, comments); not what
 * a line means, the caps, or how a too long or exposed file is worded. */
#include "textfile.h"

#include <errno.h>
#include <fcntl.h>
#include <sodium.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

int common_textfile_read(const char *path, const char *what, size_t max_bytes, int flags,
                         char **buf, size_t *len, struct stat *st, char *err, size_t errlen)
{
    const char *w = what ? what : "", *sp = what ? " " : "";
    int secret = (flags & COMMON_TEXTFILE_SECRET) != 0;
    *buf = NULL;
    *len = 0;
    int fd = open(path, O_RDONLY | O_CLOEXEC | O_NOCTTY);
    if (fd < 0) {
        if (errno == ENOENT && (flags & COMMON_TEXTFILE_MISSING_OK))
            return COMMON_TEXTFILE_MISSING;
        if (err && errlen)
            snprintf(err, errlen, "cannot open %s%s%s: %s", w, sp, path, strerror(errno));
        return -1;
    }
    int rc = -1;
    char *text = NULL;
    size_t full = max_bytes + 1, cap = full, n = 0;
    struct stat sb;
    if (fstat(fd, &sb) != 0)
        memset(&sb, 0, sizeof sb); /* unknown: not regular, read as a stream */
    if (st)
        *st = sb;
    if ((flags & COMMON_TEXTFILE_REGULAR) && !S_ISREG(sb.st_mode)) {
        if (err && errlen)
            snprintf(err, errlen, "%s%s%s is not a regular file", w, sp, path);
        goto cleanup;
    }
    if (secret && (sb.st_mode & 077)) {
        rc = COMMON_TEXTFILE_EXPOSED;
        goto cleanup;
    }
    /* Secure memory cannot grow in place, and secrets are tiny: take the cap. */
    if (!secret && S_ISREG(sb.st_mode) && (uint64_t)sb.st_size < (uint64_t)max_bytes)
        cap = (size_t)sb.st_size + 1;
    if (secret)
        text = sodium_init() < 0 ? NULL : sodium_malloc(cap);
    else
        text = malloc(cap);
    if (!text) {
        if (err && errlen)
            snprintf(err, errlen, "out of %smemory reading %s", secret ? "secure " : "", path);
        goto cleanup;
    }
    for (;;) {
        if (n == cap) {
            if (cap == full)
                break; /* more than max_bytes */
            /* It grew since fstat (or never said its size): go on up to the cap. */
            char *more = realloc(text, full);
            if (!more) {
                if (err && errlen)
                    snprintf(err, errlen, "out of memory reading %s", path);
                goto cleanup;
            }
            text = more;
            cap = full;
        }
        ssize_t k = read(fd, text + n, cap - n);
        if (k < 0 && errno == EINTR)
            continue;
        if (k < 0) {
            if (err && errlen)
                snprintf(err, errlen, "cannot read %s%s%s: %s", w, sp, path, strerror(errno));
            goto cleanup;
        }
        if (k == 0)
            break;
        n += (size_t)k;
    }
    if (n > max_bytes) {
        rc = COMMON_TEXTFILE_TOO_LONG;
    } else {
        text[n] = '\0'; /* n < cap: a full buffer either grew or is too long */
        rc = 0;
    }
    *buf = text;
    *len = n;
    text = NULL;
cleanup:
    if (text) {
        if (secret)
            sodium_free(text); /* wipes before it frees */
        else
            free(text);
    }
    close(fd);
    return rc;
}

void common_textfile_prefix(char *err, size_t errlen, const char *what, const char *path)
{
    if (!err || !errlen)
        return;
    char tmp[512];
    snprintf(tmp, sizeof tmp, "%s", err);
    snprintf(err, errlen, "%s%s%s: %s", what ? what : "", what ? " " : "", path, tmp);
}

int common_textfile_lines(const char *text, size_t len, int flags, common_textfile_line_cb cb,
                          void *arg, char *err, size_t errlen)
{
    long number = 0;
    size_t i = 0;
    while (i < len) {
        const char *nl = memchr(text + i, '\n', len - i);
        size_t end = nl ? (size_t)(nl - text) : len;
        const char *line = text + i;
        size_t n = end - i;
        number++;
        i = end + 1;
        if (flags & COMMON_TEXTFILE_NO_CONTROLS) {
            for (size_t k = 0; k < n; k++) {
                unsigned char c = (unsigned char)line[k];
                if ((c < 0x20 && c != '\t' && !(c == '\r' && k == n - 1)) || c == 0x7f) {
                    if (err && errlen)
                        snprintf(err, errlen, "line %ld: a control character", number);
                    return -1;
                }
            }
        }
        while (n > 0 && (line[n - 1] == '\r' || line[n - 1] == ' ' || line[n - 1] == '\t'))
            n--;
        while (n > 0 && (*line == ' ' || *line == '\t')) {
            line++;
            n--;
        }
        if (n == 0 || line[0] == '#')
            continue;
        if (cb(line, n, number, arg, err, errlen) != 0)
            return -1;
    }
    return 0;
}
