/* cmd_front.c: `fitfarm front FILE`: the Pareto front of a file of results
 * and its hypervolume. Reads JSON Lines (the output of `fitfarm eval`,
 * `fitfarm export`, or fitfarm-nsga2's front.jsonl and population.jsonl) or
 * CSV (fitfarm-nsga2's front.csv, `fitfarm export --format csv`, or any
 * table of objective columns), keeps the results whose status is ok, drops
 * the dominated ones and repeated vectors, and prints the front, the
 * reference point and the hypervolume (text, or one JSON object).
 *
 * Every objective is minimised, as fitfarm's plugins report them (a
 * plugin's fitness is a cost: zdt*, dtlz2, granular). Owns reading and
 * checking the input and the output format; the dominance filter and the
 * hypervolume are client/nsga2/sort.c and hypervolume.c. */
#include <dlfcn.h>
#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "cli_plugin.h"
#include "cli_util.h"
#include "commands.h"
#include "hypervolume.h"
#include "knee.h"
#include "plot.h"
#include "sort.h"

#define FRONT_MAX_BYTES (1024u * 1024u * 1024u) /* the whole input is read into memory */
#define FRONT_MAX_OBJECTIVES 64u
#define FRONT_MAX_POINTS 20000000u
#define FRONT_MAX_COLUMNS 4096u
#define FRONT_CURVE_SAMPLES 20000u /* Monte Carlo samples per generation of the curve */

static const char s_help[] =
    "usage: fitfarm front FILE [--ref R1,R2,...] [--json] [--samples N]\n"
    "                     [--png OUT | --svg OUT] [--labels NAME1,NAME2,...]\n"
    "                     [--plugin NAME [--plugin-dir DIR]]\n"
    "\n"
    "Prints the Pareto front of the ok results in FILE ('-' for stdin; a\n"
    "fitfarm-nsga2 output folder means its population.jsonl) and its\n"
    "hypervolume. Every objective is minimised, as fitfarm plugins report them.\n"
    "\n"
    "input (the format is told by the first character: '{' JSON Lines, else CSV):\n"
    "  JSON Lines: objects with \"fitness\": [numbers] (null is skipped) and, when\n"
    "    present, \"status\" (only \"ok\" is kept) and \"generation\"; the output of\n"
    "    fitfarm eval (with --aggregate only its aggregate lines are used), of\n"
    "    fitfarm export, and fitfarm-nsga2's front.jsonl and population.jsonl.\n"
    "  CSV: a header line, then one row per result. The objectives are the\n"
    "    \"fitness\" column (a JSON array, as fitfarm export writes it), else the\n"
    "    columns named f1, f2, ..., else every column but id, generation, status.\n"
    "    A \"status\" column keeps only ok rows.\n"
    "\n"
    "options:\n"
    "  --ref R1,R2,...  the hypervolume's reference point. Without it: per\n"
    "                   objective, the front's worst value plus 10% of the front's\n"
    "                   range in it (where the front has one value v: v plus\n"
    "                   0.1 max(|v|, 1)); it is printed either way\n"
    "  --json           one JSON object instead of text\n"
    "  --samples N      Monte Carlo samples for 4 or more objectives (default\n"
    "                   1000000)\n"
    "  --png OUT        draw the front into a PNG: objective against objective\n"
    "                   (every pair of the first four), every ok result as a dot\n"
    "                   (later generations darker when the input has them), the\n"
    "                   front highlighted, the knee ringed; with generations, a\n"
    "                   panel of each generation's hypervolume against the same\n"
    "                   reference point (e.g. fitfarm-nsga2's population.jsonl)\n"
    "  --svg OUT        the same picture as SVG\n"
    "  --labels L1,...  axis labels, one per objective (default: the CSV column\n"
    "                   names, else f1, f2, ...)\n"
    "  --plugin NAME    label the axes with the names and units plugin NAME\n"
    "                   declares (fitfarm_plugin_objective_names), e.g. granular:\n"
    "                   \"transmissibility (dB)\", \"settlement (mm)\"; the plugin file\n"
    "                   is read on this machine (NAME.so, or a path; NAME@VERSION\n"
    "                   finds NAME.so); --labels wins\n"
    "  --plugin-dir DIR look for the plugin in DIR first (repeatable)\n"
    "\n"
    "knee: after scaling each objective to the front's range, the front point\n"
    "with the smallest sum (in two objectives, the point farthest from the line\n"
    "joining the front's two ends); it is printed and drawn.\n"
    "\n"
    "hypervolume: exact in 2 objectives (sort and sweep) and in 3 (a dimension\n"
    "sweep over the third objective); from 4 objectives a Monte Carlo estimate\n"
    "with its standard error, from a fixed seed so one file gives one number.\n"
    "Points that do not beat the reference in every objective add nothing.\n"
    "\n"
    "exit status: 0 ok, 1 the input has no ok result or cannot be read,\n"
    "2 usage error.\n";

typedef struct {
    double *f;        /* n x m */
    size_t *line;     /* source line of each point */
    long *generation; /* -1 when the input has none */
    size_t n, cap, m;
    size_t read, skipped; /* results seen; of those, not ok */
    int has_generation;
    char *labels[FRONT_MAX_OBJECTIVES]; /* CSV objective column names, malloc'd */
} front_points_t;

static int s_usage(const char *fmt, const char *arg)
{
    fprintf(stderr, "fitfarm front: ");
    fprintf(stderr, fmt, arg ? arg : "");
    fprintf(stderr, " (see fitfarm front --help)\n");
    return 2;
}

static char *s_read_all(const char *path, size_t *len)
{
    FILE *f = strcmp(path, "-") == 0 ? stdin : fopen(path, "rbe");
    if (!f) {
        fprintf(stderr, "fitfarm front: cannot read %s: %s\n", path, strerror(errno));
        return NULL;
    }
    size_t cap = 1 << 16, n = 0;
    char *buf = malloc(cap);
    while (buf) {
        if (n + 1 >= cap) {
            if (cap >= FRONT_MAX_BYTES) {
                fprintf(stderr, "fitfarm front: %s is larger than %u bytes\n", path,
                        FRONT_MAX_BYTES);
                free(buf);
                buf = NULL;
                break;
            }
            char *grown = realloc(buf, cap * 2);
            if (!grown) {
                free(buf);
                buf = NULL;
                break;
            }
            buf = grown;
            cap *= 2;
        }
        size_t got = fread(buf + n, 1, cap - n - 1, f);
        n += got;
        if (got == 0)
            break;
    }
    if (buf && ferror(f)) {
        fprintf(stderr, "fitfarm front: reading %s failed\n", path);
        free(buf);
        buf = NULL;
    }
    if (f != stdin)
        fclose(f);
    if (buf)
        buf[n] = '\0';
    *len = n;
    return buf;
}

/* Appends one ok point of m objectives; 0, or -1 after printing why. */
static int s_add(front_points_t *p, const double *v, size_t m, size_t line, long gen)
{
    if (p->m == 0) {
        if (m == 0 || m > FRONT_MAX_OBJECTIVES) {
            fprintf(stderr, "fitfarm front: line %zu has %zu objectives; 1 to %u are accepted\n",
                    line, m, FRONT_MAX_OBJECTIVES);
            return -1;
        }
        p->m = m;
    } else if (m != p->m) {
        fprintf(stderr, "fitfarm front: line %zu has %zu objectives, the lines before it %zu\n",
                line, m, p->m);
        return -1;
    }
    for (size_t j = 0; j < m; j++)
        if (!isfinite(v[j])) {
            fprintf(stderr, "fitfarm front: line %zu: objective %zu is not a finite number\n",
                    line, j + 1);
            return -1;
        }
    if (p->n == p->cap) {
        if (p->n >= FRONT_MAX_POINTS) {
            fprintf(stderr, "fitfarm front: more than %u results\n", FRONT_MAX_POINTS);
            return -1;
        }
        size_t cap = p->cap ? p->cap * 2 : 1024;
        double *f = realloc(p->f, cap * m * sizeof *f);
        if (f)
            p->f = f;
        size_t *l = realloc(p->line, cap * sizeof *l);
        if (l)
            p->line = l;
        long *g = realloc(p->generation, cap * sizeof *g);
        if (g)
            p->generation = g;
        if (!f || !l || !g) {
            fprintf(stderr, "fitfarm front: out of memory\n");
            return -1;
        }
        p->cap = cap;
    }
    memcpy(p->f + p->n * m, v, m * sizeof *v);
    p->line[p->n] = line;
    p->generation[p->n] = gen;
    p->n++;
    return 0;
}

/* A JSON array of numbers into v (at most FRONT_MAX_OBJECTIVES); returns the
 * count or -1 after printing. */
static long s_json_numbers(const json_t *arr, double *v, size_t line)
{
    size_t k = json_array_size(arr);
    if (k > FRONT_MAX_OBJECTIVES) {
        fprintf(stderr, "fitfarm front: line %zu has %zu objectives; at most %u are accepted\n",
                line, k, FRONT_MAX_OBJECTIVES);
        return -1;
    }
    for (size_t j = 0; j < k; j++) {
        const json_t *x = json_array_get(arr, j);
        if (!json_is_number(x)) {
            fprintf(stderr, "fitfarm front: line %zu: fitness[%zu] is not a number\n", line, j);
            return -1;
        }
        v[j] = json_number_value(x);
    }
    return (long)k;
}

static int s_load_jsonl(char *text, size_t len, front_points_t *p)
{
    /* With eval's --aggregate, a genome's summary line stands for it and its
     * replicate lines are left out; without aggregate lines, every line is a
     * result. */
    int aggregates = strstr(text, "\"aggregate\"") != NULL;
    int pass_aggregate = 0;
    for (int pass = 0; pass < (aggregates ? 2 : 1); pass++) {
        size_t line = 0, found = 0;
        p->n = p->read = p->skipped = 0;
        p->has_generation = 0;
        for (size_t at = 0; at < len;) {
            char *nl = memchr(text + at, '\n', len - at);
            size_t end = nl ? (size_t)(nl - text) : len;
            line++;
            size_t b = at;
            at = end + 1;
            while (b < end && (text[b] == ' ' || text[b] == '\t' || text[b] == '\r'))
                b++;
            if (b == end)
                continue;
            json_error_t jerr;
            json_t *o = json_loadb(text + b, end - b, JSON_REJECT_DUPLICATES, &jerr);
            if (!o || !json_is_object(o)) {
                fprintf(stderr, "fitfarm front: line %zu is not a JSON object%s%s\n", line,
                        o ? "" : ": ", o ? "" : jerr.text);
                json_decref(o);
                return -1;
            }
            int is_aggregate = json_object_get(o, "aggregate") != NULL;
            found += (size_t)is_aggregate;
            if (aggregates && pass == 0) {
                json_decref(o);
                continue; /* first pass only learns whether aggregate lines exist */
            }
            if (is_aggregate != pass_aggregate) {
                json_decref(o);
                continue;
            }
            p->read++;
            const json_t *status = json_object_get(o, "status");
            const json_t *fit = json_object_get(o, "fitness");
            const json_t *gen = json_object_get(o, "generation");
            if (status && !json_is_string(status)) {
                fprintf(stderr, "fitfarm front: line %zu: \"status\" is not a string\n", line);
                json_decref(o);
                return -1;
            }
            if (!fit && !status) {
                fprintf(stderr, "fitfarm front: line %zu has no \"fitness\"\n", line);
                json_decref(o);
                return -1;
            }
            if ((status && strcmp(json_string_value(status), "ok") != 0) || !fit ||
                json_is_null(fit)) {
                p->skipped++;
                json_decref(o);
                continue;
            }
            if (!json_is_array(fit)) {
                fprintf(stderr, "fitfarm front: line %zu: \"fitness\" is not an array\n", line);
                json_decref(o);
                return -1;
            }
            long g = -1;
            if (gen) {
                if (!json_is_integer(gen) || json_integer_value(gen) < 0) {
                    fprintf(stderr, "fitfarm front: line %zu: \"generation\" is not a whole "
                                    "number >= 0\n", line);
                    json_decref(o);
                    return -1;
                }
                g = (long)json_integer_value(gen);
                p->has_generation = 1;
            }
            double v[FRONT_MAX_OBJECTIVES];
            long k = s_json_numbers(fit, v, line);
            json_decref(o);
            if (k < 0 || s_add(p, v, (size_t)k, line, g) != 0)
                return -1;
        }
        if (pass == 0 && aggregates)
            pass_aggregate = found > 0;
    }
    return 0;
}

/* Splits one CSV record (RFC 4180: quoted fields, "" inside quotes) starting
 * at *at; fields are NUL-terminated in place. Returns the field count, or -1
 * for an unterminated quote or too many fields. *line advances over the
 * newlines the record holds. */
static long s_csv_record(char *text, size_t len, size_t *at, char **fields, size_t max,
                         size_t *line)
{
    size_t i = *at, k = 0;
    for (;;) {
        if (k == max)
            return -1;
        char *out = text + i;
        fields[k++] = out;
        if (i < len && text[i] == '"') {
            size_t w = i;
            i++;
            for (;;) {
                if (i >= len)
                    return -1;
                if (text[i] == '"' && i + 1 < len && text[i + 1] == '"') {
                    text[w++] = '"';
                    i += 2;
                } else if (text[i] == '"') {
                    i++;
                    break;
                } else {
                    if (text[i] == '\n')
                        (*line)++;
                    text[w++] = text[i++];
                }
            }
            out = text + w;
        } else {
            while (i < len && text[i] != ',' && text[i] != '\n' && text[i] != '\r')
                i++;
            out = text + i;
        }
        /* Read the separator before the terminating NUL may overwrite it. */
        char c = i < len ? text[i] : '\n';
        char after = i + 1 < len ? text[i + 1] : '\0';
        *out = '\0';
        if (c == ',') {
            i++;
            continue;
        }
        if (c == '\r' && after == '\n')
            i += 2;
        else if (c == '\n' || c == '\r')
            i += i < len ? 1 : 0;
        else
            return -1; /* text after a closing quote */
        break;
    }
    *at = i;
    return (long)k;
}

static int s_number(const char *s, double *out)
{
    while (*s == ' ')
        s++;
    if (!*s)
        return -1;
    char *end;
    errno = 0;
    double v = strtod(s, &end);
    while (*end == ' ')
        end++;
    if (errno == ERANGE || *end || !isfinite(v))
        return -1;
    *out = v;
    return 0;
}

static int s_load_csv(char *text, size_t len, front_points_t *p)
{
    static char *fields[FRONT_MAX_COLUMNS];
    static char *header[FRONT_MAX_COLUMNS];
    static int role[FRONT_MAX_COLUMNS]; /* 0 ignored, 1 objective */
    size_t at = 0, line = 1;
    long nh = s_csv_record(text, len, &at, fields, FRONT_MAX_COLUMNS, &line);
    if (nh <= 0) {
        fprintf(stderr, "fitfarm front: the CSV header line cannot be read (a quote left open, "
                        "text after a closing quote, or more than %u columns)\n",
                FRONT_MAX_COLUMNS);
        return -1;
    }
    memcpy(header, fields, (size_t)nh * sizeof *header); /* the names stay in text */
    long fitness_col = -1, status_col = -1, gen_col = -1;
    size_t named = 0;
    for (long c = 0; c < nh; c++) {
        const char *h = fields[c];
        role[c] = 0;
        if (strcmp(h, "fitness") == 0)
            fitness_col = c;
        else if (strcmp(h, "status") == 0)
            status_col = c;
        else if (strcmp(h, "generation") == 0)
            gen_col = c;
        if (h[0] == 'f' && h[1] && strspn(h + 1, "0123456789") == strlen(h + 1)) {
            role[c] = 1;
            named++;
        }
    }
    if (fitness_col < 0 && named == 0)
        for (long c = 0; c < nh; c++)
            role[c] = c != status_col && c != gen_col && strcmp(fields[c], "id") != 0;
    for (long c = 0, j = 0; fitness_col < 0 && c < nh && j < (long)FRONT_MAX_OBJECTIVES; c++)
        if (role[c] && !(p->labels[j++] = strdup(header[c]))) {
            fprintf(stderr, "fitfarm front: out of memory\n");
            return -1;
        }
    p->has_generation = gen_col >= 0;
    long cols = nh;
    while (at < len) {
        size_t here = ++line;
        size_t rec_line = here;
        if (text[at] == '\n' || (text[at] == '\r' && at + 1 < len && text[at + 1] == '\n')) {
            at += text[at] == '\r' ? 2 : 1;
            continue; /* blank line */
        }
        long k = s_csv_record(text, len, &at, fields, FRONT_MAX_COLUMNS, &line);
        if (k < 0) {
            fprintf(stderr, "fitfarm front: CSV line %zu cannot be read (a quote left open, text "
                            "after a closing quote, or more than %u fields)\n", rec_line,
                    FRONT_MAX_COLUMNS);
            return -1;
        }
        if (k != cols) {
            fprintf(stderr, "fitfarm front: CSV line %zu has %ld fields, the header %ld\n",
                    rec_line, k, cols);
            return -1;
        }
        p->read++;
        if (status_col >= 0 && strcmp(fields[status_col], "ok") != 0) {
            p->skipped++;
            continue;
        }
        double v[FRONT_MAX_OBJECTIVES];
        size_t m = 0;
        if (fitness_col >= 0) {
            json_error_t jerr;
            json_t *arr = json_loads(fields[fitness_col], JSON_DECODE_ANY, &jerr);
            if (json_is_null(arr)) {
                json_decref(arr);
                p->skipped++;
                continue;
            }
            if (!json_is_array(arr)) {
                fprintf(stderr, "fitfarm front: CSV line %zu: \"fitness\" is not a JSON array "
                                "of numbers\n", rec_line);
                json_decref(arr);
                return -1;
            }
            long got = s_json_numbers(arr, v, rec_line);
            json_decref(arr);
            if (got < 0)
                return -1;
            m = (size_t)got;
        } else {
            for (long c = 0; c < cols; c++) {
                if (!role[c])
                    continue;
                if (m == FRONT_MAX_OBJECTIVES) {
                    fprintf(stderr, "fitfarm front: more than %u objective columns\n",
                            FRONT_MAX_OBJECTIVES);
                    return -1;
                }
                if (s_number(fields[c], &v[m]) != 0) {
                    fprintf(stderr, "fitfarm front: CSV line %zu, column \"%.64s\": '%.64s' is "
                                    "not a finite number\n", rec_line, header[c], fields[c]);
                    return -1;
                }
                m++;
            }
        }
        long g = -1;
        if (gen_col >= 0) {
            double gv;
            if (s_number(fields[gen_col], &gv) != 0 || gv < 0 || gv != floor(gv) || gv > 1e15) {
                fprintf(stderr, "fitfarm front: CSV line %zu: generation '%.64s' is not a whole "
                                "number >= 0\n", rec_line, fields[gen_col]);
                return -1;
            }
            g = (long)gv;
        }
        if (s_add(p, v, m, rec_line, g) != 0)
            return -1;
    }
    return 0;
}

static void s_print_number(FILE *f, double v)
{
    char num[32];
    snprintf(num, sizeof num, "%.17g", v);
    fputs(num, f);
}

static int s_cmp_long(const void *a, const void *b)
{
    long x = *(const long *)a, y = *(const long *)b;
    return (x > y) - (x < y);
}

/* Each generation's hypervolume against ref: the non-dominated points of
 * that generation's results. Fills *gens and *hvs (caller frees); returns
 * the number of generations or -1 when out of memory. */
static long s_curve(const front_points_t *p, const double *ref, double **gens, double **hvs)
{
    long *g = malloc(p->n * sizeof *g);
    double *sub = malloc(p->n * p->m * sizeof *sub);
    size_t *keep = malloc(p->n * sizeof *keep);
    double *fr = malloc(p->n * p->m * sizeof *fr);
    long count = -1;
    *gens = *hvs = NULL;
    if (!g || !sub || !keep || !fr)
        goto done;
    memcpy(g, p->generation, p->n * sizeof *g);
    qsort(g, p->n, sizeof *g, s_cmp_long);
    size_t distinct = 0;
    for (size_t i = 0; i < p->n; i++)
        if (i == 0 || g[i] != g[i - 1])
            g[distinct++] = g[i];
    *gens = malloc(distinct * sizeof **gens);
    *hvs = malloc(distinct * sizeof **hvs);
    if (!*gens || !*hvs)
        goto done;
    for (size_t d = 0; d < distinct; d++) {
        size_t k = 0;
        for (size_t i = 0; i < p->n; i++)
            if (p->generation[i] == g[d])
                memcpy(sub + (k++) * p->m, p->f + i * p->m, p->m * sizeof *sub);
        long h = nsga2_sort_nondominated(sub, k, p->m, keep);
        if (h < 0)
            goto done;
        for (long i = 0; i < h; i++)
            memcpy(fr + i * p->m, sub + keep[i] * p->m, p->m * sizeof *fr);
        nsga2_hv_t hv;
        if (nsga2_hypervolume(fr, (size_t)h, p->m, ref, FRONT_CURVE_SAMPLES, &hv) != 0)
            goto done;
        (*gens)[d] = (double)g[d];
        (*hvs)[d] = hv.value;
    }
    count = (long)distinct;
done:
    if (count < 0) {
        free(*gens);
        free(*hvs);
        *gens = *hvs = NULL;
    }
    free(g);
    free(sub);
    free(keep);
    free(fr);
    return count;
}

/* The --png/--svg picture. Returns the exit status. */
static int s_picture(const front_points_t *p, const size_t *front, size_t h, size_t knee,
                     const double *ref, const nsga2_hv_t *hv, const char *labels_text,
                     const char *plugin, const char *const *dirs, const char *out, int svg,
                     const char *input)
{
    const size_t m = p->m;
    if (m < 2) {
        fprintf(stderr, "fitfarm front: a picture needs at least two objectives; %s has one\n",
                input);
        return 1;
    }
    static char copy[8192];
    static char fallback[FRONT_MAX_OBJECTIVES][CLI_PLUGIN_LABEL_BYTES];
    const char *labels[FRONT_MAX_OBJECTIVES];
    const fitfarm_plugin_objective_t *declared = NULL;
    size_t n_declared = 0;
    void *dl = NULL;
    if (plugin && !labels_text) {
        char err[512];
        if (!cli_plugin_open(plugin, dirs, &dl, err, sizeof err) ||
            cli_plugin_objectives(dl, plugin, &declared, &n_declared, err, sizeof err) != 0) {
            fprintf(stderr, "fitfarm front: --plugin: %s\n", err);
            if (dl)
                dlclose(dl);
            return 1;
        }
    }
    for (size_t j = 0; j < m; j++) {
        cli_plugin_label(declared, n_declared, j, fallback[j], sizeof fallback[j]);
        labels[j] = p->labels[j] && !dl ? p->labels[j] : fallback[j];
    }
    if (dl)
        dlclose(dl); /* the labels are copies */
    if (labels_text) {
        if (strlen(labels_text) >= sizeof copy) {
            fprintf(stderr, "fitfarm front: --labels is longer than %zu bytes\n", sizeof copy - 1);
            return 2;
        }
        strcpy(copy, labels_text);
        size_t k = 0;
        for (char *save = NULL, *t = strtok_r(copy, ",", &save); t; t = strtok_r(NULL, ",", &save))
            if (k < m)
                labels[k++] = t;
            else
                k++;
        if (k != m) {
            fprintf(stderr, "fitfarm front: --labels names %zu objectives; the results have "
                            "%zu (see fitfarm front --help)\n", k, m);
            return 2;
        }
    }
    double *gens = NULL, *hvs = NULL;
    long n_hv = 0;
    if (p->has_generation) {
        n_hv = s_curve(p, ref, &gens, &hvs);
        if (n_hv < 0) {
            fprintf(stderr, "fitfarm front: out of memory\n");
            return 1;
        }
    }
    const char *base = strrchr(input, '/') ? strrchr(input, '/') + 1 : input;
    char title[512], sub[512], note[512], refs[400];
    snprintf(title, sizeof title, "%.200s: %zu of %zu ok results on the front", base, h, p->n);
    int used = 0;
    for (size_t j = 0; j < m && used >= 0 && (size_t)used < sizeof refs; j++)
        used += snprintf(refs + used, sizeof refs - (size_t)used, "%s%.4g", j ? ", " : "", ref[j]);
    if (hv->method == NSGA2_HV_MONTE_CARLO)
        snprintf(sub, sizeof sub, "hypervolume %.6g +- %.2g (Monte Carlo) against (%s); knee ringed",
                 hv->value, hv->std_error, refs);
    else
        snprintf(sub, sizeof sub, "hypervolume %.6g against (%s); knee ringed", hv->value, refs);
    snprintf(note, sizeof note, "hypervolume over generations, reference point (%s)", refs);
    long *gen = p->has_generation ? p->generation : NULL;
    nsga2_plot_t plot = {
        .f = p->f, .n = p->n, .m = m, .generation = gen, .front = front, .n_front = h,
        .knee = (long)knee, .labels = labels, .hv_gen = gens, .hv = hvs,
        .n_hv = (size_t)(n_hv > 1 ? n_hv : 0), .title = title, .subtitle = sub,
        .hv_note = note,
    };
    char err[512];
    int rc = nsga2_plot_write(&plot, out, svg, err, sizeof err);
    free(gens);
    free(hvs);
    if (rc != 0) {
        fprintf(stderr, "fitfarm front: %s\n", err);
        return 1;
    }
    fprintf(stderr, "fitfarm front: drew %s\n", out);
    return 0;
}

int cli_cmd_front(int argc, char **argv)
{
    const char *path = NULL, *ref_text = NULL, *png = NULL, *svg = NULL, *labels_text = NULL, *v;
    const char *plugin = NULL;
    cli_plugin_args_t pa = {.params = "{}"};
    char err[512];
    int matched;
    int json = 0;
    uint64_t samples = 0;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            fputs(s_help, stdout);
            return 0;
        } else if (strcmp(argv[i], "--json") == 0) {
            json = 1;
        } else if (cli_match_value(argc, argv, &i, "--ref", &v)) {
            if (!v)
                return s_usage("--ref needs R1,R2,...", NULL);
            ref_text = v;
        } else if (cli_match_value(argc, argv, &i, "--samples", &v)) {
            if (!v || cli_parse_u64(v, 1000, 1000000000ull, &samples) != 0)
                return s_usage("--samples is a whole number from 1000 to 1000000000, not '%s'",
                               v);
        } else if ((matched = cli_match_file(argc, argv, &i, "--png", &png)) != 0 ||
                   (matched = cli_match_file(argc, argv, &i, "--svg", &svg)) != 0) {
            if (matched < 0)
                return s_usage("--png and --svg need a file name", NULL);
        } else if (cli_match_value(argc, argv, &i, "--labels", &v)) {
            if (!v)
                return s_usage("--labels needs NAME1,NAME2,...", NULL);
            labels_text = v;
        } else if (cli_match_value(argc, argv, &i, "--plugin", &v)) {
            if (!v || !*v)
                return s_usage("--plugin needs a plugin name or file", NULL);
            plugin = v;
        } else if ((matched = cli_plugin_match(argc, argv, &i, CLI_PLUGIN_ARGS_DIRS, &pa, err,
                                         sizeof err)) != 0) {
            if (matched < 0)
                return s_usage("%s", err);
        } else if (argv[i][0] == '-' && argv[i][1] != '\0') {
            return s_usage("unknown option '%s'", argv[i]);
        } else if (path) {
            return s_usage("one FILE only; '%s' is a second", argv[i]);
        } else {
            path = argv[i];
        }
    }
    if (!path)
        return s_usage("FILE is required ('-' for stdin)", NULL);
    if (png && svg)
        return s_usage("one picture at a time: --png or --svg", NULL);
    cli_plugin_dirs(pa.dirs, pa.ndirs);
    double ref[FRONT_MAX_OBJECTIVES];
    size_t n_ref = 0;
    if (ref_text) {
        const char *s = ref_text;
        for (;;) {
            char *end;
            errno = 0;
            double x = strtod(s, &end);
            if (end == s || errno == ERANGE || !isfinite(x) || (*end && *end != ',') ||
                n_ref == FRONT_MAX_OBJECTIVES)
                return s_usage("--ref is a comma-separated list of finite numbers, not '%s'",
                               ref_text);
            ref[n_ref++] = x;
            if (!*end)
                break;
            s = end + 1;
        }
    }

    /* A fitfarm-nsga2 output folder stands for its population.jsonl: every
     * generation, so the picture gets its hypervolume curve. */
    static char folder_file[4096];
    struct stat st;
    if (strcmp(path, "-") != 0 && stat(path, &st) == 0 && S_ISDIR(st.st_mode)) {
        int w = snprintf(folder_file, sizeof folder_file, "%s/population.jsonl", path);
        if (w < 0 || (size_t)w >= sizeof folder_file)
            return s_usage("the folder name '%s' is too long", path);
        path = folder_file;
    }
    size_t len = 0;
    char *text = s_read_all(path, &len);
    if (!text)
        return 1;
    front_points_t p = {0};
    size_t first = strspn(text, " \t\r\n");
    int rc = first < len && text[first] == '{' ? s_load_jsonl(text, len, &p)
                                               : s_load_csv(text, len, &p);
    free(text);
    size_t *keep = NULL;
    double *fr = NULL;
    int exit_code = 1;
    if (rc != 0)
        goto done;
    if (p.n == 0) {
        fprintf(stderr, "fitfarm front: %s has no ok result (%zu read, %zu not ok)\n", path,
                p.read, p.skipped);
        goto done;
    }
    if (n_ref && n_ref != p.m) {
        fprintf(stderr, "fitfarm front: --ref has %zu values but the results have %zu "
                        "objectives\n", n_ref, p.m);
        exit_code = 2;
        goto done;
    }
    const size_t m = p.m;
    keep = malloc(p.n * sizeof *keep);
    long h = keep ? nsga2_sort_nondominated(p.f, p.n, m, keep) : -1;
    fr = h > 0 ? malloc((size_t)h * m * sizeof *fr) : NULL;
    if (h <= 0 || !fr) {
        fprintf(stderr, "fitfarm front: out of memory\n");
        goto done;
    }
    for (long i = 0; i < h; i++)
        memcpy(fr + i * m, p.f + keep[i] * m, m * sizeof *fr);
    if (!n_ref)
        nsga2_hypervolume_default_ref(fr, (size_t)h, m, ref);
    nsga2_hv_t hv;
    if (nsga2_hypervolume(fr, (size_t)h, m, ref, samples, &hv) != 0) {
        fprintf(stderr, "fitfarm front: out of memory\n");
        goto done;
    }
    long knee = nsga2_knee(fr, (size_t)h, m); /* position in the front */
    if (knee < 0) {
        fprintf(stderr, "fitfarm front: out of memory\n");
        goto done;
    }
    const char *method = m <= 2   ? "exact, sort and sweep"
                         : m == 3 ? "exact, dimension sweep over the third objective"
                                  : "Monte Carlo estimate";
    const char *rule = n_ref ? "given (--ref)"
                             : "the front's worst value plus 10% of its range, per objective";
    if (json) {
        printf("{\"objectives\": %zu, \"read\": %zu, \"not_ok\": %zu, \"ok\": %zu, "
               "\"front_size\": %ld, \"reference\": [", m, p.read, p.skipped, p.n, h);
        for (size_t j = 0; j < m; j++) {
            if (j)
                fputs(", ", stdout);
            s_print_number(stdout, ref[j]);
        }
        printf("], \"reference_rule\": \"%s\", \"hypervolume\": ", n_ref ? "given" : "front");
        s_print_number(stdout, hv.value);
        printf(", \"method\": \"%s\", \"std_error\": ", hv.method == NSGA2_HV_EXACT ? "exact"
                                                                                : "monte_carlo");
        s_print_number(stdout, hv.std_error);
        printf(", \"samples\": %llu, \"knee\": {\"line\": %zu, \"fitness\": [",
               (unsigned long long)hv.samples, p.line[keep[knee]]);
        for (size_t j = 0; j < m; j++) {
            if (j)
                fputs(", ", stdout);
            s_print_number(stdout, fr[(size_t)knee * m + j]);
        }
        fputs("]}, \"front\": [", stdout);
        for (long i = 0; i < h; i++) {
            printf("%s{\"line\": %zu, ", i ? ", " : "", p.line[keep[i]]);
            if (p.has_generation)
                printf("\"generation\": %ld, ", p.generation[keep[i]]);
            fputs("\"fitness\": [", stdout);
            for (size_t j = 0; j < m; j++) {
                if (j)
                    fputs(", ", stdout);
                s_print_number(stdout, fr[i * m + j]);
            }
            fputs("]}", stdout);
        }
        fputs("]}\n", stdout);
    } else {
        printf("results: %zu read, %zu not ok, %zu ok; %ld on the front (%zu objectives, all "
               "minimised)\n", p.read, p.skipped, p.n, h, m);
        printf("reference point: ");
        for (size_t j = 0; j < m; j++) {
            if (j)
                fputs(", ", stdout);
            s_print_number(stdout, ref[j]);
        }
        printf(" (%s)\n", rule);
        printf("hypervolume: %.17g", hv.value);
        if (hv.method == NSGA2_HV_MONTE_CARLO)
            printf(" +- %.3g (standard error, %llu samples)", hv.std_error,
                   (unsigned long long)hv.samples);
        printf(" (%s)\n", method);
        printf("knee: line %zu:", p.line[keep[knee]]);
        for (size_t j = 0; j < m; j++) {
            fputc(' ', stdout);
            s_print_number(stdout, fr[(size_t)knee * m + j]);
        }
        printf("\n");
        printf("front (line%s: objectives):\n", p.has_generation ? ", generation" : "");
        for (long i = 0; i < h; i++) {
            printf("  %zu", p.line[keep[i]]);
            if (p.has_generation)
                printf(", %ld", p.generation[keep[i]]);
            fputs(":", stdout);
            for (size_t j = 0; j < m; j++) {
                fputc(' ', stdout);
                s_print_number(stdout, fr[i * m + j]);
            }
            fputc('\n', stdout);
        }
    }
    exit_code = fflush(stdout) == 0 ? 0 : 1;
    if (exit_code == 0 && (png || svg))
        exit_code = s_picture(&p, keep, (size_t)h, keep[knee], ref, &hv, labels_text,
                              plugin, pa.dirs, png ? png : svg, svg != NULL, path);
done:
    free(keep);
    free(fr);
    free(p.f);
    free(p.line);
    free(p.generation);
    for (size_t j = 0; j < FRONT_MAX_OBJECTIVES; j++)
        free(p.labels[j]);
    return exit_code;
}
