/* cli_util.c: see cli_util.h. */
#include "cli_util.h"

#include <ctype.h>
#include <errno.h>
#include <stdlib.h>
#include <string.h>

int cli_parse_u64(const char *s, uint64_t min, uint64_t max, uint64_t *out)
{
    if (!s || !*s || !isdigit((unsigned char)s[0]))
        return -1;
    errno = 0;
    char *end = NULL;
    unsigned long long v = strtoull(s, &end, 10);
    if (errno != 0 || *end != '\0' || v < min || v > max)
        return -1;
    *out = (uint64_t)v;
    return 0;
}

int cli_match_value(int argc, char **argv, int *i, const char *name, const char **value)
{
    const char *arg = argv[*i];
    size_t n = strlen(name);
    if (strncmp(arg, name, n) != 0)
        return 0;
    if (arg[n] == '=') {
        *value = arg + n + 1;
        return 1;
    }
    if (arg[n] != '\0')
        return 0;
    if (*i + 1 < argc) {
        *value = argv[*i + 1];
        (*i)++;
    } else {
        *value = NULL;
    }
    return 1;
}

/* Length of the valid UTF-8 sequence at s (1..4), or 0 if invalid. */
static size_t s_utf8_len(const unsigned char *s)
{
    size_t n;
    uint32_t cp;
    if (s[0] < 0x80)
        return 1;
    if ((s[0] & 0xe0) == 0xc0) {
        n = 2;
        cp = s[0] & 0x1f;
    } else if ((s[0] & 0xf0) == 0xe0) {
        n = 3;
        cp = s[0] & 0x0f;
    } else if ((s[0] & 0xf8) == 0xf0) {
        n = 4;
        cp = s[0] & 0x07;
    } else {
        return 0;
    }
    for (size_t i = 1; i < n; i++) {
        if ((s[i] & 0xc0) != 0x80)
            return 0;
        cp = (cp << 6) | (s[i] & 0x3f);
    }
    static const uint32_t min_cp[5] = {0, 0, 0x80, 0x800, 0x10000};
    if (cp < min_cp[n] || cp > 0x10ffff || (cp >= 0xd800 && cp <= 0xdfff))
        return 0;
    return n;
}

void cli_json_string(FILE *f, const char *s)
{
    const unsigned char *p = (const unsigned char *)s;
    fputc('"', f);
    while (*p) {
        if (*p == '"' || *p == '\\') {
            fputc('\\', f);
            fputc(*p++, f);
        } else if (*p == '\n') {
            fputs("\\n", f);
            p++;
        } else if (*p == '\t') {
            fputs("\\t", f);
            p++;
        } else if (*p < 0x20 || *p == 0x7f) {
            fprintf(f, "\\u%04x", *p);
            p++;
        } else if (*p < 0x80) {
            fputc(*p++, f);
        } else {
            size_t n = s_utf8_len(p);
            if (n == 0) {
                fputs("\\ufffd", f);
                p++;
            } else {
                fwrite(p, 1, n, f);
                p += n;
            }
        }
    }
    fputc('"', f);
}

int cli_match_file(int argc, char **argv, int *i, const char *name, const char **out)
{
    const char *v = NULL;
    if (!cli_match_value(argc, argv, i, name, &v))
        return 0;
    if (!v || !*v)
        return -1;
    *out = v;
    return 1;
}
