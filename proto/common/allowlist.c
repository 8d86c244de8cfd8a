/* allowlist.c: parsing and lookup of key allow-lists (see allowlist.h). Owns
 * the parsed entries, kept sorted by key for binary search; not the files'
 * writing (the CLI appends one line with O_APPEND) nor what admission means
 * (the broker's ZAP handler). */
#include "allowlist.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "keyline.h"
#include "textfile.h"

struct common_allowlist {
    common_allow_entry_t *entries; /* sorted by key */
    size_t n;
};

static int s_cmp(const void *a, const void *b)
{
    return memcmp(((const common_allow_entry_t *)a)->key, ((const common_allow_entry_t *)b)->key,
                  COMMON_KEY_BYTES);
}

int common_allowlist_label_ok(const char *label)
{
    size_t n = strlen(label);
    if (n > COMMON_ALLOW_LABEL_MAX)
        return -1;
    for (size_t i = 0; i < n; i++)
        if (!common_keyline_char_ok((unsigned char)label[i]))
            return -1;
    return 0;
}

typedef struct {
    common_allowlist_t *self;
    size_t cap; /* entries allocated */
} s_parse_t;

/* One "KEY [label]" line into the list. */
static int s_line(const char *line, size_t n, long number, void *arg, char *err, size_t errlen)
{
    s_parse_t *p = arg;
    common_allowlist_t *self = p->self;
    if (n < COMMON_KEY_Z85 ||
        (n > COMMON_KEY_Z85 && line[COMMON_KEY_Z85] != ' ' && line[COMMON_KEY_Z85] != '\t')) {
        snprintf(err, errlen,
                 "line %ld: expected a 40-character Z85 public key, then an optional label",
                 number);
        return -1;
    }
    if (self->n == COMMON_ALLOW_MAX_KEYS) {
        snprintf(err, errlen, "line %ld: more than %d keys", number, COMMON_ALLOW_MAX_KEYS);
        return -1;
    }
    common_allow_entry_t *grown =
        common_keyline_grow(self->entries, &p->cap, self->n, sizeof *self->entries);
    if (!grown) {
        snprintf(err, errlen, "out of memory");
        return -1;
    }
    self->entries = grown;
    common_allow_entry_t *e = &self->entries[self->n];
    memset(e, 0, sizeof *e);
    if (common_keyline_split(line, n, number, "label", 0, COMMON_ALLOW_LABEL_MAX, e->key, e->label,
                             err, errlen) != 0)
        return -1;
    self->n++;
    return 0;
}

int common_allowlist_parse(const char *text, size_t len, common_allowlist_t **out, char *err,
                           size_t errlen)
{
    *out = NULL;
    int rc = -1;
    common_allowlist_t *self = calloc(1, sizeof *self);
    if (!self) {
        snprintf(err, errlen, "out of memory");
        return -1;
    }
    if (common_keyline_text_ok(text, len, COMMON_ALLOW_MAX_BYTES, "an allow-list", err, errlen) != 0)
        goto cleanup;
    s_parse_t p = {self, 0};
    if (common_textfile_lines(text, len, 0, s_line, &p, err, errlen) != 0)
        goto cleanup;
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
    char *buf = NULL;
    size_t n = 0;
    struct stat st;
    int flags = COMMON_TEXTFILE_REGULAR | (missing_ok ? COMMON_TEXTFILE_MISSING_OK : 0);
    int rc = common_textfile_read(path, NULL, COMMON_ALLOW_MAX_BYTES, flags, &buf, &n, &st, err,
                                  errlen);
    if (rc == COMMON_TEXTFILE_MISSING)
        return common_allowlist_parse("", 0, out, err, errlen);
    if (rc < 0)
        return -1;
    rc = -1;
    /* Judged by the size fstat stated: the CLI may append while we read, and
     * half a line must not be taken for the list; the caller may try again. */
    if ((uint64_t)st.st_size > COMMON_ALLOW_MAX_BYTES) {
        snprintf(err, errlen, "%s is larger than an allow-list may be (%u bytes)", path,
                 COMMON_ALLOW_MAX_BYTES);
        goto cleanup;
    }
    if ((uint64_t)n > (uint64_t)st.st_size) {
        snprintf(err, errlen, "%s changed while it was read; try again", path);
        goto cleanup;
    }
    if (common_allowlist_parse(buf, n, out, err, errlen) != 0) {
        common_textfile_prefix(err, errlen, NULL, path);
        goto cleanup;
    }
    rc = 0;
cleanup:
    free(buf);
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

const common_allow_entry_t *common_allowlist_at(const common_allowlist_t *self, size_t i)
{
    return self && i < self->n ? &self->entries[i] : NULL;
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
