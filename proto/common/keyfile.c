/* keyfile.c: CURVE key pairs, Z85 and key files (see keyfile.h). Owns the
 * parsing and writing of the files and the secure memory of secrets; not the
 * sockets that use them. */
#include "keyfile.h"

#include <errno.h>
#include <fcntl.h>
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "textfile.h"

static const char s_z85[] =
    "0123456789abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ.-:+=^!/*?&<>()[]{}@%$#";

void common_z85_encode_key(const uint8_t key[COMMON_KEY_BYTES], char out[COMMON_KEY_Z85 + 1])
{
    size_t j = 0;
    for (size_t i = 0; i < COMMON_KEY_BYTES; i += 4) {
        uint32_t v = (uint32_t)key[i] << 24 | (uint32_t)key[i + 1] << 16 |
                     (uint32_t)key[i + 2] << 8 | key[i + 3];
        for (int k = 4; k >= 0; k--) {
            out[j + (size_t)k] = s_z85[v % 85];
            v /= 85;
        }
        j += 5;
    }
    out[j] = '\0';
}

int common_z85_decode(const char *text, size_t n, uint8_t *out)
{
    if (n % 5 != 0)
        return -1;
    for (size_t i = 0, j = 0; i < n; i += 5, j += 4) {
        uint64_t v = 0;
        for (size_t k = 0; k < 5; k++) {
            const char *p = text[i + k] ? memchr(s_z85, text[i + k], 85) : NULL;
            if (!p)
                return -1;
            v = v * 85 + (uint64_t)(p - s_z85);
        }
        if (v > UINT32_MAX)
            return -1;
        out[j] = (uint8_t)(v >> 24);
        out[j + 1] = (uint8_t)(v >> 16);
        out[j + 2] = (uint8_t)(v >> 8);
        out[j + 3] = (uint8_t)v;
    }
    return 0;
}

void common_key_fingerprint(const uint8_t public_key[COMMON_KEY_BYTES],
                            char out[COMMON_KEY_FINGERPRINT])
{
    uint8_t h[32];
    crypto_generichash(h, sizeof h, public_key, COMMON_KEY_BYTES, NULL, 0);
    static const char hex[] = "0123456789abcdef";
    for (int i = 0; i < 8; i++) {
        out[2 * i] = hex[h[i] >> 4];
        out[2 * i + 1] = hex[h[i] & 15];
    }
    out[16] = '\0';
}

/* The checks of a whole key file's text before its lines are read. */
static int s_text_ok(const char *text, size_t len, char *err, size_t errlen)
{
    if (len > COMMON_KEYFILE_MAX_BYTES) {
        if (err && errlen)
            snprintf(err, errlen, "%zu bytes: too long for a key file", len);
        return -1;
    }
    if (memchr(text, '\0', len)) {
        if (err && errlen)
            snprintf(err, errlen, "contains a NUL byte: not a key file");
        return -1;
    }
    return 0;
}

static int s_key_text(const char *text, size_t n, long number, const char *what, uint8_t *key,
                      char *err, size_t errlen)
{
    if (n != COMMON_KEY_Z85) {
        if (err && errlen)
            snprintf(err, errlen, "line %ld: %s key has %zu characters; a Z85 key has %d",
                     number, what, n, COMMON_KEY_Z85);
        return -1;
    }
    if (common_z85_decode(text, n, key) != 0) {
        if (err && errlen)
            snprintf(err, errlen, "line %ld: %s key is not valid Z85", number, what);
        return -1;
    }
    return 0;
}

typedef struct {
    uint8_t *key;
    int found;
} s_public_t;

static int s_public_line(const char *line, size_t n, long number, void *arg, char *err,
                         size_t errlen)
{
    s_public_t *p = arg;
    if (n >= 7 && memcmp(line, "secret:", 7) == 0) {
        if (err && errlen)
            snprintf(err, errlen, "line %ld: this is a SECRET key file; give the matching "
                                  ".public file instead (and keep this one private)",
                     number);
        return -1;
    }
    if (p->found) {
        if (err && errlen)
            snprintf(err, errlen, "line %ld: a public key file holds one key line", number);
        return -1;
    }
    p->found = 1;
    return s_key_text(line, n, number, "the public", p->key, err, errlen);
}

int common_keyfile_parse_public(const char *text, size_t len, uint8_t public_key[COMMON_KEY_BYTES],
                                char *err, size_t errlen)
{
    uint8_t key[COMMON_KEY_BYTES];
    s_public_t p = {key, 0};
    if (s_text_ok(text, len, err, errlen) != 0 ||
        common_textfile_lines(text, len, 0, s_public_line, &p, err, errlen) != 0)
        return -1;
    if (!p.found) {
        if (err && errlen)
            snprintf(err, errlen, "no key line (only comments or blank lines)");
        return -1;
    }
    memcpy(public_key, key, COMMON_KEY_BYTES);
    return 0;
}

typedef struct {
    common_keypair_t *pair;
    int have_secret, have_public;
    uint8_t stated_public[COMMON_KEY_BYTES];
} s_secret_t;

/* A "secret: KEY" or "public: KEY" line (tag is "secret:" or "public:"):
 * once each, the key after the tag and any blanks. */
static int s_tagged_line(const char *line, size_t n, long number, const char *tag, int *seen,
                         const char *what, uint8_t *key, char *err, size_t errlen)
{
    if (*seen) {
        if (err && errlen)
            snprintf(err, errlen, "line %ld: a second %s line", number, tag);
        return -1;
    }
    line += 7;
    n -= 7;
    while (n > 0 && (*line == ' ' || *line == '\t')) {
        line++;
        n--;
    }
    *seen = 1;
    return s_key_text(line, n, number, what, key, err, errlen);
}

static int s_secret_line(const char *line, size_t n, long number, void *arg, char *err,
                         size_t errlen)
{
    s_secret_t *s = arg;
    if (n >= 7 && memcmp(line, "secret:", 7) == 0)
        return s_tagged_line(line, n, number, "secret:", &s->have_secret, "the secret",
                             s->pair->secret_key, err, errlen);
    if (n >= 7 && memcmp(line, "public:", 7) == 0)
        return s_tagged_line(line, n, number, "public:", &s->have_public, "the public",
                             s->stated_public, err, errlen);
    if (err && errlen) {
        if (n == COMMON_KEY_Z85)
            snprintf(err, errlen, "line %ld: a bare key: this looks like a public key file; "
                                  "give the .secret file",
                     number);
        else
            snprintf(err, errlen, "line %ld: expected \"secret: KEY\" or \"public: KEY\"",
                     number);
    }
    return -1;
}

int common_keyfile_parse_secret(const char *text, size_t len, common_keypair_t *pair, char *err,
                                size_t errlen)
{
    s_secret_t s;
    memset(&s, 0, sizeof s);
    s.pair = pair;
    int rc = s_text_ok(text, len, err, errlen);
    if (rc == 0)
        rc = common_textfile_lines(text, len, 0, s_secret_line, &s, err, errlen);
    if (rc == 0 && !s.have_secret) {
        if (err && errlen)
            snprintf(err, errlen, "no \"secret:\" line: not a fitfarm secret key file");
        rc = -1;
    }
    if (rc == 0 && crypto_scalarmult_base(pair->public_key, pair->secret_key) != 0) {
        if (err && errlen)
            snprintf(err, errlen, "the secret key is degenerate");
        rc = -1;
    }
    if (rc == 0 && s.have_public &&
        sodium_memcmp(s.stated_public, pair->public_key, COMMON_KEY_BYTES) != 0) {
        if (err && errlen)
            snprintf(err, errlen, "the public: line does not belong to the secret key");
        rc = -1;
    }
    if (rc != 0)
        sodium_memzero(pair, sizeof *pair);
    return rc;
}

/* Reads a whole key file; *buf is the caller's to free (sodium_free when
 * secret, free otherwise). Words the outcomes the shared reader leaves to us. */
static int s_read(const char *path, int secret, char **buf, size_t *len, char *err,
                  size_t errlen)
{
    struct stat st;
    int flags = COMMON_TEXTFILE_REGULAR | (secret ? COMMON_TEXTFILE_SECRET : 0);
    int rc = common_textfile_read(path, "key file", COMMON_KEYFILE_MAX_BYTES, flags, buf, len,
                                  &st, err, errlen);
    if (rc == COMMON_TEXTFILE_EXPOSED && err && errlen)
        snprintf(err, errlen,
                 "secret key file %s may be read by others (mode %03o); run "
                 "'chmod 600 %s' and consider the key compromised if others had access",
                 path, (unsigned)(st.st_mode & 0777), path);
    if (rc == COMMON_TEXTFILE_TOO_LONG && err && errlen)
        snprintf(err, errlen, "key file %s is larger than %d bytes: not a key file", path,
                 COMMON_KEYFILE_MAX_BYTES);
    return rc == 0 ? 0 : -1;
}

int common_keyfile_read_public(const char *path, uint8_t public_key[COMMON_KEY_BYTES], char *err,
                               size_t errlen)
{
    char *buf = NULL;
    size_t len = 0;
    int rc = s_read(path, 0, &buf, &len, err, errlen);
    if (rc == 0 && (rc = common_keyfile_parse_public(buf, len, public_key, err, errlen)) != 0)
        common_textfile_prefix(err, errlen, "key file", path);
    free(buf);
    return rc;
}

int common_keypair_new(common_keypair_t **out)
{
    *out = NULL;
    if (sodium_init() < 0)
        return -1;
    common_keypair_t *pair = sodium_malloc(sizeof *pair);
    if (!pair)
        return -1;
    crypto_box_keypair(pair->public_key, pair->secret_key);
    *out = pair;
    return 0;
}

void common_keypair_destroy(common_keypair_t **pair_p)
{
    if (!pair_p || !*pair_p)
        return;
    sodium_free(*pair_p); /* sodium_free wipes before it frees */
    *pair_p = NULL;
}

/* A secret key was asked for and path would not do: if it holds a public
 * key (a NAME.public given as --key, mode 0644 as keygen makes it), err says
 * that instead of calling it exposed or malformed. Public text is no secret:
 * an ordinary read is fine. */
static void s_public_instead(const char *path, char *err, size_t errlen)
{
    char *buf = NULL;
    size_t len = 0;
    uint8_t key[COMMON_KEY_BYTES];
    char ignored[256];
    if (!err || !errlen)
        return;
    if (s_read(path, 0, &buf, &len, ignored, sizeof ignored) != 0) {
        free(buf); /* a too-long file leaves its first bytes here */
        return;
    }
    if (common_keyfile_parse_public(buf, len, key, ignored, sizeof ignored) == 0) {
        size_t n = strlen(path);
        int named = n > 7 && strcmp(path + n - 7, ".public") == 0;
        snprintf(err, errlen,
                 "%s is a public key, but a secret key is needed here (this machine's own "
                 "NAME.secret from fitfarm keygen%s%.*s%s)",
                 path, named ? ", probably " : "", named ? (int)(n - 7) : 0, path,
                 named ? ".secret" : "");
    }
    free(buf);
}

int common_keyfile_read_secret(const char *path, common_keypair_t **out, char *err,
                               size_t errlen)
{
    *out = NULL;
    if (sodium_init() < 0) {
        if (err && errlen)
            snprintf(err, errlen, "libsodium cannot initialise");
        return -1;
    }
    /* The file text holds the secret too: s_read keeps it in secure memory. */
    char *buf = NULL;
    common_keypair_t *pair = sodium_malloc(sizeof *pair);
    int rc = -1;
    size_t len = 0;
    if (!pair) {
        if (err && errlen)
            snprintf(err, errlen, "out of secure memory reading %s", path);
        goto cleanup;
    }
    if (s_read(path, 1, &buf, &len, err, errlen) != 0) {
        s_public_instead(path, err, errlen);
        goto cleanup;
    }
    if (common_keyfile_parse_secret(buf, len, pair, err, errlen) != 0) {
        common_textfile_prefix(err, errlen, "key file", path);
        s_public_instead(path, err, errlen);
        goto cleanup;
    }
    *out = pair;
    pair = NULL;
    rc = 0;
cleanup:
    if (buf)
        sodium_free(buf);
    if (pair)
        sodium_free(pair);
    return rc;
}

static int s_name_ok(const char *name)
{
    size_t n = strlen(name);
    if (n == 0 || n > 64 || name[0] == '.')
        return 0;
    for (size_t i = 0; i < n; i++) {
        char c = name[i];
        if (!((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
              c == '.' || c == '_' || c == '-'))
            return 0;
    }
    return 1;
}

/* Creates path exclusively with mode and writes text; removes it on failure. */
static int s_write_new(const char *path, mode_t mode, const char *text, char *err, size_t errlen)
{
    int fd = open(path, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC | O_NOFOLLOW, mode);
    if (fd < 0) {
        if (err && errlen) {
            if (errno == EEXIST)
                snprintf(err, errlen, "%s exists; refusing to overwrite a key (move it away "
                                      "first if you really mean to replace it)",
                         path);
            else
                snprintf(err, errlen, "cannot create %s: %s", path, strerror(errno));
        }
        return -1;
    }
    size_t len = strlen(text), done = 0;
    int ok = fchmod(fd, mode) == 0; /* the umask must not widen or narrow it */
    while (ok && done < len) {
        ssize_t k = write(fd, text + done, len - done);
        if (k < 0 && errno == EINTR)
            continue;
        ok = k > 0;
        if (ok)
            done += (size_t)k;
    }
    ok = ok && fsync(fd) == 0;
    ok = (close(fd) == 0) && ok;
    if (!ok) {
        if (err && errlen)
            snprintf(err, errlen, "cannot write %s: %s", path, strerror(errno));
        unlink(path);
        return -1;
    }
    return 0;
}

int common_keyfile_write_pair(const char *dir, const char *name, const common_keypair_t *pair,
                              char *public_path, size_t public_len, char *secret_path,
                              size_t secret_len, char *err, size_t errlen)
{
    if (!s_name_ok(name)) {
        if (err && errlen)
            snprintf(err, errlen, "key name '%s': use 1 to 64 letters, digits, '.', '_' or "
                                  "'-', not starting with '.'",
                     name);
        return -1;
    }
    char pub[4096], sec[4096];
    if ((size_t)snprintf(pub, sizeof pub, "%s/%s.public", dir, name) >= sizeof pub ||
        (size_t)snprintf(sec, sizeof sec, "%s/%s.secret", dir, name) >= sizeof sec) {
        if (err && errlen)
            snprintf(err, errlen, "the folder name is too long");
        return -1;
    }
    struct stat st;
    if (lstat(pub, &st) == 0 || lstat(sec, &st) == 0) {
        if (err && errlen)
            snprintf(err, errlen, "%s exists; refusing to overwrite a key (move it away "
                                  "first if you really mean to replace it)",
                     lstat(pub, &st) == 0 ? pub : sec);
        return -1;
    }
    char z_pub[COMMON_KEY_Z85 + 1];
    common_z85_encode_key(pair->public_key, z_pub);
    char pub_text[256];
    snprintf(pub_text, sizeof pub_text, "# fitfarm public key for %s (CURVE, Z85)\n%s\n", name,
             z_pub);
    int rc = -1;
    char *sec_text = sodium_malloc(512);
    char *z_sec = sodium_malloc(COMMON_KEY_Z85 + 1);
    if (!sec_text || !z_sec) {
        if (err && errlen)
            snprintf(err, errlen, "out of secure memory");
        goto cleanup;
    }
    common_z85_encode_key(pair->secret_key, z_sec);
    snprintf(sec_text, 512,
             "# fitfarm SECRET key for %s - keep private; never copy it off this machine\n"
             "secret: %s\npublic: %s\n",
             name, z_sec, z_pub);
    /* The secret first: a crash in between leaves no public key without its secret. */
    if (s_write_new(sec, 0600, sec_text, err, errlen) != 0)
        goto cleanup;
    if (s_write_new(pub, 0644, pub_text, err, errlen) != 0) {
        unlink(sec);
        goto cleanup;
    }
    if (public_path && public_len)
        snprintf(public_path, public_len, "%s", pub);
    if (secret_path && secret_len)
        snprintf(secret_path, secret_len, "%s", sec);
    rc = 0;
cleanup:
    if (sec_text)
        sodium_free(sec_text);
    if (z_sec)
        sodium_free(z_sec);
    return rc;
}
