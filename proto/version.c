/* version.c: version order, constraint matching and plugin references (see
 * version.h for the rules and where they come from). */
#include "version.h"

#include <stdio.h>
#include <string.h>

#include "limits.h"

static int s_digit(char c)
{
    return c >= '0' && c <= '9';
}

static int s_letter(char c)
{
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z');
}

/* The weight of one character in a non-digit run (dpkg's order()): '~'
 * lowest, then the end of the run (0), letters, then everything else. */
static int s_order(char c)
{
    if (c == '\0' || s_digit(c))
        return 0;
    if (s_letter(c))
        return (unsigned char)c;
    if (c == '~')
        return -1;
    return (unsigned char)c + 256;
}

int proto_version_cmp(const char *a, const char *b)
{
    while (*a || *b) {
        /* A run of non-digits. */
        while ((*a && !s_digit(*a)) || (*b && !s_digit(*b))) {
            int d = s_order(*a) - s_order(*b);
            if (d)
                return d;
            if (*a && !s_digit(*a))
                a++;
            if (*b && !s_digit(*b))
                b++;
        }
        /* A run of digits, as a number of any length: no overflow. */
        while (*a == '0')
            a++;
        while (*b == '0')
            b++;
        size_t na = 0, nb = 0;
        while (s_digit(a[na]))
            na++;
        while (s_digit(b[nb]))
            nb++;
        if (na != nb)
            return na < nb ? -1 : 1;
        int d = memcmp(a, b, na);
        if (d)
            return d;
        a += na;
        b += nb;
    }
    return 0;
}

int proto_version_matches(const char *version, const char *constraint)
{
    size_t n = strlen(constraint);
    if (n == 0 || strncmp(version, constraint, n) != 0)
        return 0;
    return version[n] == '\0' || version[n] == '.';
}

int proto_plugin_ref_split(const char *ref, char *name, size_t size, const char **constraint,
                           char *err, size_t errlen)
{
    if (err && errlen)
        err[0] = '\0';
    *constraint = NULL;
    if (size)
        name[0] = '\0';
    if (!ref || !*ref) {
        snprintf(err, errlen, "the plugin is empty (give NAME or NAME@VERSION)");
        return -1;
    }
    const char *at = strchr(ref, '@');
    size_t nl = at ? (size_t)(at - ref) : strnlen(ref, PROTO_MAX_NAME_BYTES);
    if (nl == 0) {
        snprintf(err, errlen, "plugin '%.64s' has no name before '@'", ref);
        return -1;
    }
    if (nl >= PROTO_MAX_NAME_BYTES || nl >= size) {
        snprintf(err, errlen, "plugin name '%.64s...' is longer than %u bytes", ref,
                 PROTO_MAX_NAME_BYTES - 1);
        return -1;
    }
    for (size_t i = 0; i < nl; i++) {
        char c = ref[i];
        if (!((c >= 'a' && c <= 'z') || s_digit(c) || c == '_' || c == '-')) {
            snprintf(err, errlen,
                     "plugin name '%.*s' has a character outside [a-z0-9_-] (a version "
                     "constraint goes after '@': NAME@VERSION)",
                     (int)nl, ref);
            return -1;
        }
    }
    memcpy(name, ref, nl);
    name[nl] = '\0';
    if (!at)
        return 0;
    const char *c = at + 1;
    size_t cl = strnlen(c, PROTO_MAX_NAME_BYTES);
    if (cl == 0) {
        snprintf(err, errlen,
                 "plugin '%s@': the version constraint after '@' is empty (give e.g. %s@1 or "
                 "%s@1.2.3)",
                 name, name, name);
        return -1;
    }
    if (cl >= PROTO_MAX_NAME_BYTES) {
        snprintf(err, errlen, "plugin %s: the version constraint is longer than %u bytes", name,
                 PROTO_MAX_NAME_BYTES - 1);
        return -1;
    }
    for (size_t i = 0; i < cl; i++)
        if (c[i] < 0x21 || c[i] > 0x7e) {
            snprintf(err, errlen,
                     "plugin %s: the version constraint has a blank or non-printable character "
                     "(byte %zu); versions are printable ASCII without spaces",
                     name, i + 1);
            return -1;
        }
    *constraint = c;
    return 0;
}
