/* sharelist.c: parsing and lookup of the run share list (see sharelist.h).
 * Owns the parsed entries, sorted by (run id, key) for binary search; not the
 * file's writing (the CLI appends one line with O_APPEND) nor what sharing
 * grants (the broker's access.c). */
#include "sharelist.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "keyline.h"
#include "textfile.h"

typedef struct {
    char run[COMMON_SHARE_RUN_MAX + 1];
    uint8_t key[COMMON_KEY_BYTES];
} s_entry_t;

struct common_sharelist {
    s_entry_t *entries;
    size_t n, cap;
};

static int s_cmp(const void *a, const void *b)
{
    const s_entry_t *x = a, *y = b;
    int c = strcmp(x->run, y->run);
    return c ? c : memcmp(x->key, y->key, COMMON_KEY_BYTES);
}

int common_sharelist_run_ok(const char *run_id)
{
    size_t n = run_id ? strlen(run_id) : 0;
    if (n == 0 || n > COMMON_SHARE_RUN_MAX)
        return -1;
    if (run_id[0] == ' ' || run_id[0] == '\t' || run_id[n - 1] == ' ' || run_id[n - 1] == '\t')
        return -1; /* the parser trims them: the line would name another run */
    for (size_t i = 0; i < n; i++)
        if (!common_keyline_char_ok((unsigned char)run_id[i]) && run_id[i] != '\t')
            return -1;
    return 0;
}

/* One "KEY RUN" line into the list. */
static int s_line(const char *line, size_t n, long number, void *arg, char *err, size_t errlen)
{
    common_sharelist_t *self = arg;
    if (n <= COMMON_KEY_Z85 + 1 || (line[COMMON_KEY_Z85] != ' ' && line[COMMON_KEY_Z85] != '\t')) {
        snprintf(err, errlen,
                 "line %ld: expected a 40-character Z85 client public key, then a run id",
                 number);
        return -1;
    }
    if (self->n == COMMON_SHARE_MAX_ENTRIES) {
        snprintf(err, errlen, "line %ld: more than %d shares", number, COMMON_SHARE_MAX_ENTRIES);
        return -1;
    }
    s_entry_t *grown = common_keyline_grow(self->entries, &self->cap, self->n, sizeof *grown);
    if (!grown) {
        snprintf(err, errlen, "out of memory");
        return -1;
    }
    self->entries = grown;
    s_entry_t *e = &self->entries[self->n];
    memset(e, 0, sizeof *e);
    if (common_keyline_split(line, n, number, "run id", 1, COMMON_SHARE_RUN_MAX, e->key, e->run,
                             err, errlen) != 0)
        return -1;
    self->n++;
    return 0;
}

int common_sharelist_parse(const char *text, size_t len, common_sharelist_t **out, char *err,
                           size_t errlen)
{
    *out = NULL;
    int rc = -1;
    common_sharelist_t *self = calloc(1, sizeof *self);
    if (!self) {
        snprintf(err, errlen, "out of memory");
        return -1;
    }
    if (common_keyline_text_ok(text, len, COMMON_SHARE_MAX_BYTES, "a share list", err, errlen) != 0)
        goto cleanup;
    if (common_textfile_lines(text, len, 0, s_line, self, err, errlen) != 0)
        goto cleanup;
    if (self->n > 1)
        qsort(self->entries, self->n, sizeof *self->entries, s_cmp);
    for (size_t k = 1; k < self->n; k++) {
        if (s_cmp(&self->entries[k - 1], &self->entries[k]) == 0) {
            char fp[COMMON_KEY_FINGERPRINT];
            common_key_fingerprint(self->entries[k].key, fp);
            snprintf(err, errlen, "key %s is listed twice for run %s", fp, self->entries[k].run);
            goto cleanup;
        }
    }
    *out = self;
    self = NULL;
    rc = 0;
cleanup:
    common_sharelist_destroy(&self);
    return rc;
}

int common_sharelist_read(const char *path, common_sharelist_t **out, char *err, size_t errlen)
{
    *out = NULL;
    char *buf = NULL;
    size_t n = 0;
    struct stat st;
    int flags = COMMON_TEXTFILE_REGULAR | COMMON_TEXTFILE_MISSING_OK;
    int rc = common_textfile_read(path, NULL, COMMON_SHARE_MAX_BYTES, flags, &buf, &n, &st, err,
                                  errlen);
    if (rc == COMMON_TEXTFILE_MISSING)
        return common_sharelist_parse("", 0, out, err, errlen);
    if (rc < 0)
        return -1;
    int too_long = rc == COMMON_TEXTFILE_TOO_LONG;
    rc = -1;
    if (too_long || (uint64_t)st.st_size > COMMON_SHARE_MAX_BYTES) {
        snprintf(err, errlen, "%s is larger than a share list may be (%u bytes)", path,
                 COMMON_SHARE_MAX_BYTES);
        goto cleanup;
    }
    /* Judged by the size fstat stated: the CLI may append while we read. */
    if ((uint64_t)n > (uint64_t)st.st_size) {
        snprintf(err, errlen, "%s changed while it was read; try again", path);
        goto cleanup;
    }
    if (common_sharelist_parse(buf, n, out, err, errlen) != 0) {
        common_textfile_prefix(err, errlen, NULL, path);
        goto cleanup;
    }
    rc = 0;
cleanup:
    free(buf);
    return rc;
}

void common_sharelist_destroy(common_sharelist_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    free((*self_p)->entries);
    free(*self_p);
    *self_p = NULL;
}

size_t common_sharelist_size(const common_sharelist_t *self)
{
    return self ? self->n : 0;
}

int common_sharelist_has(const common_sharelist_t *self, const char *run_id,
                         const uint8_t key[COMMON_KEY_BYTES])
{
    if (!self || self->n == 0 || !run_id || strlen(run_id) > COMMON_SHARE_RUN_MAX)
        return 0;
    s_entry_t probe;
    memset(&probe, 0, sizeof probe);
    snprintf(probe.run, sizeof probe.run, "%s", run_id);
    memcpy(probe.key, key, COMMON_KEY_BYTES);
    return bsearch(&probe, self->entries, self->n, sizeof *self->entries, s_cmp) != NULL;
}
