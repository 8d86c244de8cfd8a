/* eval_lines.c: the lines that `fitfarm eval` prints (eval_lines.h): JSON
 * Lines on stdout, one per request (genome x replicate) and, with
 * --aggregate, one per genome; and the progress line on the terminal.
 * 64-bit seeds are strings (a JSON reader with doubles would round them);
 * numbers round-trip (proto_format_double). Not here: reading input and
 * ordering the output (cmd_eval.c). */
#include "eval_lines.h"

#include <math.h>
#include <stdlib.h>

#include "cli_util.h"
#include "key.h"
#include "params.h"

void eval_print_head(FILE *out, const eval_record_t *rec, unsigned r, const char *status)
{
    fprintf(out, "{\"id\": %s, \"line\": %zu, \"replicate\": %u, \"status\": \"%s\"",
            rec->id_json, rec->line, r, status);
}

int eval_print_result(FILE *out, const eval_record_t *rec, const fitfarm_result_t *res)
{
    eval_print_head(out, rec, res->replicate, fitfarm_status_name(res->status));
    int ok = res->status == FITFARM_STATUS_OK;
    if (ok) {
        fputs(", \"fitness\": [", out);
        for (size_t k = 0; k < res->n_fitness; k++) {
            char num[32];
            proto_format_double(res->fitness[k], num);
            fprintf(out, "%s%s", k ? ", " : "", num);
        }
        fputs("]", out);
    } else {
        fputs(", \"fitness\": null", out);
    }
    char hex[2 * PROTO_KEY_BYTES + 1];
    proto_hex(res->key, PROTO_KEY_BYTES, hex);
    fprintf(out, ", \"cached\": %s, \"seed\": \"%llu\", \"key\": \"%s\"",
            res->cached ? "true" : "false", (unsigned long long)res->seed, hex);
    if (!ok) {
        fputs(", \"error\": ", out);
        cli_json_string(out, res->error[0] ? res->error : fitfarm_status_name(res->status));
    }
    fputs("}\n", out);
    return !ok;
}

static int s_cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

void eval_print_aggregate(FILE *out, const eval_record_t *rec, unsigned replicates, int how)
{
    unsigned k = replicates;
    fitfarm_result_t res = FITFARM_RESULT_INIT;
    size_t n_obj = 0;
    unsigned n_ok = 0;
    for (unsigned r = 0; r < k; r++)
        if (fitfarm_batch_result(rec->batch, rec->index, r, &res) == 0 &&
            res.status == FITFARM_STATUS_OK) {
            if (n_ok == 0)
                n_obj = res.n_fitness;
            if (res.n_fitness == n_obj)
                n_ok++;
        }
    fprintf(out, "{\"id\": %s, \"line\": %zu, \"aggregate\": \"%s\", \"replicates\": %u, "
            "\"ok\": %u", rec->id_json, rec->line, how == 1 ? "mean" : "median", k, n_ok);
    double *v = n_ok ? malloc(n_ok * sizeof *v) : NULL;
    if (n_ok == 0 || !v) {
        fputs(", \"fitness\": null, \"std\": null}\n", out);
        free(v);
        return;
    }
    char num[32];
    for (int pass = 0; pass < 2; pass++) {
        fputs(pass == 0 ? ", \"fitness\": [" : ", \"std\": ", out);
        if (pass == 1 && n_ok < 2) {
            fputs("null", out);
            break;
        }
        if (pass == 1)
            fputs("[", out);
        for (size_t j = 0; j < n_obj; j++) {
            unsigned n = 0;
            for (unsigned r = 0; r < k; r++)
                if (fitfarm_batch_result(rec->batch, rec->index, r, &res) == 0 &&
                    res.status == FITFARM_STATUS_OK && res.n_fitness == n_obj)
                    v[n++] = res.fitness[j];
            /* Sums in replicate order, so the bits depend on the results only. */
            double sum = 0.0;
            for (unsigned i = 0; i < n; i++)
                sum += v[i];
            double mean = sum / n, value;
            if (pass == 0 && how == 2) {
                qsort(v, n, sizeof *v, s_cmp_double);
                value = n % 2 ? v[n / 2] : (v[n / 2 - 1] + v[n / 2]) / 2.0;
            } else if (pass == 0) {
                value = mean;
            } else {
                double ss = 0.0; /* sample standard deviation (n - 1) */
                for (unsigned i = 0; i < n; i++)
                    ss += (v[i] - mean) * (v[i] - mean);
                value = sqrt(ss / (n - 1));
            }
            proto_format_double(value, num);
            fprintf(out, "%s%s", j ? ", " : "", num);
        }
        fputs("]", out);
    }
    fputs("}\n", out);
    free(v);
}

void eval_print_progress(FILE *out, const eval_progress_t *p, int final)
{
    double rate = p->seconds > 0.5 ? (double)p->answered / p->seconds : 0;
    size_t left = p->sent > p->answered ? p->sent - p->answered : 0;
    char tail[96] = "";
    if (!final && left > 0 && p->silent >= 5)
        snprintf(tail, sizeof tail, ", no result for %.0f s (waiting for the pool)", p->silent);
    else if (!final && left > 0 && rate > 0)
        snprintf(tail, sizeof tail, ", %.1f/s, about %.0f s left", rate, (double)left / rate);
    else if (rate > 0)
        snprintf(tail, sizeof tail, ", %.1f/s", rate);
    /* \033[K clears what a longer previous line left on the right. */
    fprintf(out, "\rfitfarm eval: %zu of %zu results, %zu cached, %zu failed%s\033[K%s",
            p->answered, p->sent, p->cached, p->failed, tail, final ? "\n" : "");
    fflush(out);
}
