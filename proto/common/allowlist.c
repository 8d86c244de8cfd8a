/* allowlist.c: parsing and lookup of key allow-lists (see allowlist.h). Owns
 * the parsed entries, kept sorted by key for binary search; not the files'
 * writing (the CLI appends one line with O_APPEND) nor what admission means
 * (the broker's ZAP handler). */
#include "allowlist.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

struct common_allowlist {
    common_allow_entry_t *entries; /* sorted by key */
    size_t n;
};

static int s_cmp(const void *a, const void *b)
{
    return memcmp(((const common_allow_entry_t *)a)->key, ((const common_allow_entry_t *)b)->key,
                  COMMON_KEY_BYTES);
}

static int s_label_char_ok(unsigned char c)
{
    return c >= 0x20 && c != 0x7f; /* printable ASCII and UTF-8 bytes; no controls */
}

int common_allowlist_label_ok(const char *label)
{
    size_t n = strlen(label);
    if (n > COMMON_ALLOW_LABEL_MAX)
        return -1;
    for (size_t i = 0; i < n; i++)
        if (!s_label_char_ok((unsigned char)label[i]))
            return -1;
    return 0;
}

int common_allowlist_parse(const char *text, size_t len, common_allowlist_t **out, char *err,
                           size_t errlen)
{
    *out = NULL;
    int rc = -1;
    common_allowlist_t *self = calloc(1, sizeof *self);
    size_t cap = 0;
    if (!self) {
        snprintf(err, errlen, "out of memory");
        return -1;
    }
    if (len > COMMON_ALLOW_MAX_BYTES) {
        snprintf(err, errlen, "%zu bytes: larger than an allow-list may be (%u)", len,
                 COMMON_ALLOW_MAX_BYTES);
        goto cleanup;
    }
    if (memchr(text, '\0', len)) {
        snprintf(err, errlen, "contains a NUL byte: not an allow-list");
        goto cleanup;
    }
    long number = 0;
    size_t i = 0;
    while (i < len) {
        const char *nl = memchr(text + i, '\n', len - i);
        size_t end = nl ? (size_t)(nl - text) : len;
        const char *line = text + i;
        size_t n = end - i;
        number++;
        i = end + 1;
        while (n > 0 && (line[n - 1] == '\r' || line[n - 1] == ' ' || line[n - 1] == '\t'))
            n--;
        while (n > 0 && (*line == ' ' || *line == '\t')) {
            line++;
            n--;
        }
        if (n == 0 || line[0] == '#')
            continue;
        if (n < COMMON_KEY_Z85 ||
            (n > COMMON_KEY_Z85 && line[COMMON_KEY_Z85] != ' ' && line[COMMON_KEY_Z85] != '\t')) {
            snprintf(err, errlen,
                     "line %ld: expected a 40-character Z85 public key, then an optional label",
                     number);
            goto cleanup;
        }
        if (self->n == COMMON_ALLOW_MAX_KEYS) {
            snprintf(err, errlen, "line %ld: more than %d keys", number, COMMON_ALLOW_MAX_KEYS);
            goto cleanup;
        }
        if (self->n == cap) {
            size_t ncap = cap ? cap * 2 : 16;
            common_allow_entry_t *e = realloc(self->entries, ncap * sizeof *e);
            if (!e) {
                snprintf(err, errlen, "out of memory");
                goto cleanup;
            }
            self->entries = e;
            cap = ncap;
        }
        common_allow_entry_t *e = &self->entries[self->n];
        memset(e, 0, sizeof *e);
        if (common_z85_decode(line, COMMON_KEY_Z85, e->key) != 0) {
            snprintf(err, errlen, "line %ld: the key is not valid Z85", number);
            goto cleanup;
        }
        const char *label = line + COMMON_KEY_Z85;
        size_t ln = n - COMMON_KEY_Z85;
        while (ln > 0 && (*label == ' ' || *label == '\t')) {
            label++;
            ln--;
        }
        if (ln > COMMON_ALLOW_LABEL_MAX) {
            snprintf(err, errlen, "line %ld: the label is longer than %d bytes", number,
                     COMMON_ALLOW_LABEL_MAX);
            goto cleanup;
        }
        for (size_t k = 0; k < ln; k++) {
            if (!s_label_char_ok((unsigned char)label[k]) && label[k] != '\t') {
                snprintf(err, errlen, "line %ld: the label has a control character", number);
                goto cleanup;
            }
        }
        memcpy(e->label, label, ln);
        e->label[ln] = '\0';
        self->n++;
    }
    if (self->n > 1)
        qsort(self->entries, self->n, sizeof *self->entries, s_cmp);
    for (size_t k = 1; k < self->n; k++) {
        if (s_cmp(&self->entries[k - 1], &self->entries[k]) == 0) {
            char fp[COMMON_KEY_FINGERPRINT];
            common_key_fingerprint(self->entries[k].key, fp);
            snprintf(err, errlen, "key %s is listed twice", fp);
            goto cleanup;
        }
    }
    *out = self;
    self = NULL;
    rc = 0;
cleanup:
    common_allowlist_destroy(&self);
    return rc;
}

int common_allowlist_read(const char *path, int missing_ok, common_allowlist_t **out, char *err,
                          size_t errlen)
{
    *out = NULL;
    int rc = -1;
    char *buf = NULL;
    int fd = open(path, O_RDONLY | O_CLOEXEC | O_NOCTTY);
    if (fd < 0) {
        if (errno == ENOENT && missing_ok)
            return common_allowlist_parse("", 0, out, err, errlen);
        snprintf(err, errlen, "cannot open %s: %s", path, strerror(errno));
        return -1;
    }
    struct stat st;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
        snprintf(err, errlen, "%s is not a regular file", path);
        goto cleanup;
    }
    if ((uint64_t)st.st_size > COMMON_ALLOW_MAX_BYTES) {
        snprintf(err, errlen, "%s is larger than an allow-list may be (%u bytes)", path,
                 COMMON_ALLOW_MAX_BYTES);
        goto cleanup;
    }
    size_t cap = (size_t)st.st_size + 1, n = 0;
    buf = malloc(cap);
    if (!buf) {
        snprintf(err, errlen, "out of memory reading %s", path);
        goto cleanup;
    }
    for (;;) {
        ssize_t k = read(fd, buf + n, cap - n);
        if (k < 0 && errno == EINTR)
            continue;
        if (k < 0) {
            snprintf(err, errlen, "cannot read %s: %s", path, strerror(errno));
            goto cleanup;
        }
        if (k == 0)
            break;
        n += (size_t)k;
        if (n == cap) { /* it grew while we read: take what the cap allows */
            snprintf(err, errlen, "%s changed while it was read; try again", path);
            goto cleanup;
        }
    }
    if (common_allowlist_parse(buf, n, out, err, errlen) != 0) {
        char tmp[512];
        snprintf(tmp, sizeof tmp, "%s", err);
        snprintf(err, errlen, "%s: %s", path, tmp);
        goto cleanup;
    }
    rc = 0;
cleanup:
    free(buf);
    close(fd);
    return rc;
}

void common_allowlist_destroy(common_allowlist_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    free((*self_p)->entries);
    free(*self_p);
    *self_p = NULL;
}

size_t common_allowlist_size(const common_allowlist_t *self)
{
    return self ? self->n : 0;
}

const common_allow_entry_t *common_allowlist_find(const common_allowlist_t *self,
                                                  const uint8_t key[COMMON_KEY_BYTES])
{
    if (!self || self->n == 0)
        return NULL;
    common_allow_entry_t probe;
    memcpy(probe.key, key, COMMON_KEY_BYTES);
    return bsearch(&probe, self->entries, self->n, sizeof *self->entries, s_cmp);
}
