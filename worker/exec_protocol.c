/* exec_protocol.c: the text side of the exec plugin's JSON Lines protocol.
 *
 * Owns word splitting of COMMAND, strict decoding of the introduction and of
 * answers, encoding of requests, and quoting of untrusted text. Everything a
 * program writes is untrusted: each field is type-checked and bounded, unknown
 * keys are refused, and any text copied into an error message is quoted so a
 * program cannot put control characters into the worker's log. Does not own
 * processes or descriptors (exec_plugin.c does). */
#include "exec_protocol.h"

#include <jansson.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "exec_plugin.h"
#include "fitfarm_plugin.h"

#define S_QUOTE_MAX 80 /* bytes of a program's line shown in an error message */

static void s_errf(char *err, size_t errlen, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static void s_errf(char *err, size_t errlen, const char *fmt, ...)
{
    if (!err || errlen == 0)
        return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err, errlen, fmt, ap);
    va_end(ap);
}

void worker_exec_protocol_quote(const char *s, size_t n, size_t max, char *out, size_t outlen)
{
    if (!out || outlen == 0)
        return;
    size_t o = 0;
    size_t i = 0;
    /* Leave room for "..." and the NUL. */
    for (; i < n && i < max; i++) {
        unsigned char c = (unsigned char)s[i];
        char piece[5];
        size_t plen;
        if (c >= 0x20 && c < 0x7f && c != '\\') {
            piece[0] = (char)c;
            plen = 1;
        } else {
            snprintf(piece, sizeof piece, "\\x%02x", c);
            plen = 4;
        }
        if (o + plen + 4 > outlen)
            break;
        memcpy(out + o, piece, plen);
        o += plen;
    }
    if (i < n && o + 4 <= outlen) {
        memcpy(out + o, "...", 3);
        o += 3;
    }
    out[o] = '\0';
}

/* ---- COMMAND -> argv ---------------------------------------------------- */

void worker_exec_protocol_argv_free(char **argv)
{
    if (!argv)
        return;
    for (size_t i = 0; argv[i]; i++)
        free(argv[i]);
    free(argv);
}

int worker_exec_protocol_split_command(const char *command, char ***argv_out, char *err,
                                       size_t errlen)
{
    int rc = -1;
    size_t n = strlen(command);
    char **argv = common_xcalloc(WORKER_EXEC_MAX_WORDS + 1, sizeof *argv);
    /* A word is never longer than the command itself. */
    char *word = common_xmalloc(n + 1);
    size_t words = 0;
    size_t i = 0;
    *argv_out = NULL;

    if (n > WORKER_EXEC_MAX_COMMAND) {
        s_errf(err, errlen, "the command is %zu bytes long, more than the limit of %u", n,
               WORKER_EXEC_MAX_COMMAND);
        goto cleanup;
    }
    for (;;) {
        while (i < n && (command[i] == ' ' || command[i] == '\t'))
            i++;
        if (i == n)
            break;
        size_t w = 0;
        while (i < n && command[i] != ' ' && command[i] != '\t') {
            char c = command[i];
            if (c == '\n' || c == '\r') {
                s_errf(err, errlen, "the command contains a line break");
                goto cleanup;
            }
            if (c == '\'') {
                size_t close = i + 1;
                while (close < n && command[close] != '\'')
                    close++;
                if (close == n) {
                    s_errf(err, errlen, "the command has an unterminated ' quote");
                    goto cleanup;
                }
                memcpy(word + w, command + i + 1, close - i - 1);
                w += close - i - 1;
                i = close + 1;
            } else if (c == '"') {
                i++;
                while (i < n && command[i] != '"') {
                    if (command[i] == '\\' && i + 1 < n &&
                        (command[i + 1] == '"' || command[i + 1] == '\\'))
                        i++;
                    word[w++] = command[i++];
                }
                if (i == n) {
                    s_errf(err, errlen, "the command has an unterminated \" quote");
                    goto cleanup;
                }
                i++;
            } else if (c == '\\') {
                if (i + 1 == n) {
                    s_errf(err, errlen, "the command ends with a lone backslash");
                    goto cleanup;
                }
                word[w++] = command[i + 1];
                i += 2;
            } else {
                word[w++] = c;
                i++;
            }
        }
        if (words == WORKER_EXEC_MAX_WORDS) {
            s_errf(err, errlen, "the command has more than %u words", WORKER_EXEC_MAX_WORDS);
            goto cleanup;
        }
        word[w] = '\0';
        argv[words++] = common_xmemdup(word, w + 1);
    }
    if (words == 0) {
        s_errf(err, errlen, "the command is empty");
        goto cleanup;
    }
    *argv_out = argv;
    argv = NULL;
    rc = 0;
cleanup:
    worker_exec_protocol_argv_free(argv);
    free(word);
    return rc;
}

/* ---- decoding ---------------------------------------------------------- */

/* Parses one line as a JSON object. Returns NULL with a sentence in err. */
static json_t *s_load_object(const char *what, const char *line, size_t len, size_t flags,
                             char *err, size_t errlen)
{
    json_error_t jerr;
    char shown[4 * S_QUOTE_MAX + 8];
    json_t *root = json_loadb(line, len, JSON_REJECT_DUPLICATES | flags, &jerr);
    if (!root) {
        worker_exec_protocol_quote(line, len, S_QUOTE_MAX, shown, sizeof shown);
        s_errf(err, errlen, "the program's %s is not JSON (%s at column %d): '%s'", what, jerr.text,
               jerr.column, shown);
        return NULL;
    }
    if (!json_is_object(root)) {
        worker_exec_protocol_quote(line, len, S_QUOTE_MAX, shown, sizeof shown);
        s_errf(err, errlen, "the program's %s is not a JSON object: '%s'", what, shown);
        json_decref(root);
        return NULL;
    }
    return root;
}

/* A bounded string of printable ASCII, for name and version. */
static int s_printable(const char *s, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if ((unsigned char)s[i] < 0x20 || (unsigned char)s[i] >= 0x7f)
            return 0;
    return 1;
}

static int s_intro_string(json_t *root, const char *key, char *out, size_t outlen, char *err,
                          size_t errlen)
{
    json_t *v = json_object_get(root, key);
    if (!v) {
        s_errf(err, errlen, "the program's introduction has no \"%s\"", key);
        return -1;
    }
    if (!json_is_string(v)) {
        s_errf(err, errlen, "the program's introduction has a \"%s\" that is not a string", key);
        return -1;
    }
    size_t n = json_string_length(v);
    if (n == 0 || n >= outlen || !s_printable(json_string_value(v), n)) {
        s_errf(err, errlen,
               "the program's introduction has a \"%s\" that is not 1 to %zu printable ASCII "
               "characters",
               key, outlen - 1);
        return -1;
    }
    memcpy(out, json_string_value(v), n + 1);
    return 0;
}

int worker_exec_protocol_intro_decode(const char *line, size_t len, worker_exec_intro_t *out,
                                      char *err, size_t errlen)
{
    int rc = -1;
    memset(out, 0, sizeof *out);
    json_t *root = s_load_object("introduction", line, len, 0, err, errlen);
    if (!root)
        goto cleanup;

    const char *key;
    json_t *value;
    json_object_foreach(root, key, value)
    {
        if (strcmp(key, "fitfarm_exec") && strcmp(key, "name") && strcmp(key, "version") &&
            strcmp(key, "objectives") && strcmp(key, "deterministic")) {
            char shown[4 * 40 + 8];
            worker_exec_protocol_quote(key, strlen(key), 40, shown, sizeof shown);
            s_errf(err, errlen, "the program's introduction has an unknown key \"%s\"", shown);
            goto cleanup;
        }
    }
    json_t *v = json_object_get(root, "fitfarm_exec");
    if (!v) {
        s_errf(err, errlen,
               "the program's first line is not an introduction: it has no \"fitfarm_exec\"");
        goto cleanup;
    }
    if (!json_is_integer(v) || json_integer_value(v) != WORKER_EXEC_PROTOCOL) {
        s_errf(err, errlen,
               "the program speaks exec protocol \"fitfarm_exec\" other than %d, the only "
               "one this worker knows",
               WORKER_EXEC_PROTOCOL);
        goto cleanup;
    }
    if (s_intro_string(root, "name", out->name, sizeof out->name, err, errlen) ||
        s_intro_string(root, "version", out->version, sizeof out->version, err, errlen))
        goto cleanup;
    v = json_object_get(root, "objectives");
    if (!v || !json_is_integer(v)) {
        s_errf(err, errlen, "the program's introduction has no integer \"objectives\"");
        goto cleanup;
    }
    json_int_t objectives = json_integer_value(v);
    if (objectives < 1 || objectives > (json_int_t)PROTO_MAX_OBJECTIVES) {
        s_errf(err, errlen,
               "the program's introduction declares %lld objectives; 1 to %u are allowed",
               (long long)objectives, PROTO_MAX_OBJECTIVES);
        goto cleanup;
    }
    out->objectives = (uint32_t)objectives;
    v = json_object_get(root, "deterministic");
    if (!v || !json_is_boolean(v)) {
        s_errf(err, errlen, "the program's introduction has no true/false \"deterministic\"");
        goto cleanup;
    }
    out->deterministic = json_is_true(v) ? 1 : 0;
    rc = 0;
cleanup:
    json_decref(root);
    return rc;
}

/* Copies a program's reason string (quoted) into err. */
static void s_reason(json_t *v, const char *kind, char *err, size_t errlen)
{
    char shown[4 * PROTO_MAX_ERROR_BYTES + 8];
    if (!json_is_string(v)) {
        s_errf(err, errlen, "the program answered \"%s\" with a value that is not a string", kind);
        return;
    }
    worker_exec_protocol_quote(json_string_value(v), json_string_length(v),
                               PROTO_MAX_ERROR_BYTES / 2, shown, sizeof shown);
    s_errf(err, errlen, "%s", shown);
}

int worker_exec_protocol_answer_decode(const char *line, size_t len, uint32_t objectives,
                                       double *fitness, char *err, size_t errlen)
{
    int rc = WORKER_EXEC_ANSWER_BAD;
    /* Integers as reals: "fitness": [1, 2] is as good as [1.0, 2.0]. */
    json_t *root = s_load_object("answer", line, len, JSON_DECODE_INT_AS_REAL, err, errlen);
    if (!root)
        goto cleanup;
    if (json_object_size(root) != 1) {
        s_errf(err, errlen,
               "the program's answer has %zu keys; exactly one of \"fitness\", \"invalid\" or "
               "\"error\" is expected",
               json_object_size(root));
        goto cleanup;
    }
    json_t *v;
    if ((v = json_object_get(root, "invalid"))) {
        s_reason(v, "invalid", err, errlen);
        rc = json_is_string(v) ? WORKER_EXEC_ANSWER_INVALID : WORKER_EXEC_ANSWER_BAD;
        goto cleanup;
    }
    if ((v = json_object_get(root, "error"))) {
        s_reason(v, "error", err, errlen);
        rc = json_is_string(v) ? WORKER_EXEC_ANSWER_ERROR : WORKER_EXEC_ANSWER_BAD;
        goto cleanup;
    }
    v = json_object_get(root, "fitness");
    if (!v) {
        const char *key = json_object_iter_key(json_object_iter(root));
        char shown[4 * 40 + 8];
        worker_exec_protocol_quote(key, strlen(key), 40, shown, sizeof shown);
        s_errf(err, errlen,
               "the program's answer has the unknown key \"%s\"; \"fitness\", \"invalid\" or "
               "\"error\" is expected",
               shown);
        goto cleanup;
    }
    if (!json_is_array(v)) {
        s_errf(err, errlen, "the program's \"fitness\" is not an array");
        goto cleanup;
    }
    if (json_array_size(v) != objectives) {
        s_errf(err, errlen,
               "the program's \"fitness\" has %zu numbers, but it introduced itself with %u "
               "objectives",
               json_array_size(v), objectives);
        goto cleanup;
    }
    for (uint32_t i = 0; i < objectives; i++) {
        json_t *x = json_array_get(v, i);
        if (!json_is_real(x)) {
            s_errf(err, errlen, "the program's fitness[%u] is %s, not a number", i,
                   json_is_null(x)      ? "null"
                   : json_is_string(x)  ? "a string"
                   : json_is_boolean(x) ? "a boolean"
                                        : "a container");
            goto cleanup;
        }
        fitness[i] = json_real_value(x);
    }
    rc = WORKER_EXEC_ANSWER_FITNESS;
cleanup:
    json_decref(root);
    return rc;
}

/* ---- encoding ---------------------------------------------------------- */

int worker_exec_protocol_params_line(const char *params_json, char **out, char *err, size_t errlen)
{
    int rc = -1;
    json_t *root = NULL;
    json_error_t jerr;
    *out = NULL;
    size_t n = strlen(params_json);
    if (n > PROTO_MAX_PARAMS_BYTES) {
        s_errf(err, errlen, "the params are %zu bytes, more than the limit of %u", n,
               PROTO_MAX_PARAMS_BYTES);
        goto cleanup;
    }
    root = json_loadb(params_json, n, JSON_REJECT_DUPLICATES, &jerr);
    if (!root) {
        s_errf(err, errlen, "the params are not JSON (%s at column %d)", jerr.text, jerr.column);
        goto cleanup;
    }
    if (!json_is_object(root)) {
        s_errf(err, errlen, "the params are not a JSON object");
        goto cleanup;
    }
    /* Compact output has no line breaks (strings escape theirs), which keeps
     * the request on one line whatever text the caller handed in. */
    char *line = json_dumps(root, JSON_COMPACT | JSON_SORT_KEYS | JSON_REAL_PRECISION(17));
    if (!line) {
        s_errf(err, errlen, "the params could not be printed as JSON");
        goto cleanup;
    }
    *out = line;
    rc = 0;
cleanup:
    json_decref(root);
    return rc;
}

static void s_reserve(char **buf, size_t *cap, size_t need)
{
    if (need <= *cap)
        return;
    size_t grown = *cap ? *cap : 256;
    while (grown < need)
        grown *= 2;
    *buf = common_xrealloc(*buf, grown, 1);
    *cap = grown;
}

int worker_exec_protocol_request_encode(const uint8_t *genome, size_t genome_len, uint64_t seed,
                                        const char *params_line, char **buf, size_t *cap,
                                        size_t *len, char *err, size_t errlen)
{
    if (genome_len % 8 != 0) {
        s_errf(err, errlen,
               "the genome has %zu bytes, which is not a whole number of 8-byte doubles",
               genome_len);
        return -1;
    }
    size_t genes = genome_len / 8;
    size_t plen = strlen(params_line);
    /* "%.17g" of a finite double is at most 24 characters, plus a comma. */
    s_reserve(buf, cap, 64 + genes * 26 + plen);
    size_t o = 0;
    memcpy(*buf, "{\"genome\":[", 11);
    o = 11;
    for (size_t i = 0; i < genes; i++) {
        double g = fitfarm_genome_f64(genome, i);
        if (!isfinite(g)) {
            s_errf(err, errlen, "gene %zu is not a finite number", i);
            return -1;
        }
        int w = snprintf(*buf + o, 32, "%s%.17g", i ? "," : "", g);
        o += (size_t)w;
    }
    int w = snprintf(*buf + o, 48, "],\"seed\":\"%llu\",\"params\":", (unsigned long long)seed);
    o += (size_t)w;
    memcpy(*buf + o, params_line, plen);
    o += plen;
    memcpy(*buf + o, "}\n", 3);
    o += 2;
    *len = o;
    return 0;
}
