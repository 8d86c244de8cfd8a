/* report.c: fitfarm-nsga2's output lines and files (see report.h). */
#include "report.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>

struct nsga2_report {
    FILE *gens, *pop, *front_jsonl, *front_csv;
    int front_header; /* front.csv's header written */
};

static FILE *s_open(const char *dir, const char *name)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "we");
    if (!f)
        fprintf(stderr, "fitfarm-nsga2: cannot write %s: %s\n", path, strerror(errno));
    return f;
}

int nsga2_report_new(const char *dir, nsga2_report_t **out)
{
    *out = NULL;
    nsga2_report_t *self = calloc(1, sizeof *self);
    if (!self) {
        fprintf(stderr, "fitfarm-nsga2: out of memory\n");
        return -1;
    }
    self->gens = s_open(dir, "generations.csv");
    self->pop = self->gens ? s_open(dir, "population.jsonl") : NULL;
    self->front_jsonl = self->pop ? s_open(dir, "front.jsonl") : NULL;
    self->front_csv = self->front_jsonl ? s_open(dir, "front.csv") : NULL;
    if (!self->front_csv) {
        nsga2_report_destroy(&self);
        return -1;
    }
    fputs("generation,evaluations,cached,failed,hypervolume\n", self->gens);
    *out = self;
    return 0;
}

int nsga2_report_destroy(nsga2_report_t **self_p)
{
    if (!self_p || !*self_p)
        return 0;
    nsga2_report_t *self = *self_p;
    int rc = 0;
    FILE *files[] = {self->gens, self->pop, self->front_jsonl, self->front_csv};
    for (size_t i = 0; i < sizeof files / sizeof files[0]; i++)
        if (files[i] && (ferror(files[i]) | fclose(files[i])) != 0)
            rc = -1;
    if (rc != 0)
        fprintf(stderr, "fitfarm-nsga2: writing the output files failed\n");
    free(self);
    *self_p = NULL;
    return rc;
}

void nsga2_report_number(FILE *f, double v)
{
    fprintf(f, "%.17g", v);
}

void nsga2_report_generation(nsga2_report_t *self, size_t gen, uint64_t evaluations,
                             uint64_t cached, size_t failed, double hv)
{
    printf("generation %zu: evaluations %llu, cached %llu, failed %zu, hypervolume %.6f\n", gen,
           (unsigned long long)evaluations, (unsigned long long)cached, failed, hv);
    fflush(stdout);
    fprintf(self->gens, "%zu,%llu,%llu,%zu,", gen, (unsigned long long)evaluations,
            (unsigned long long)cached, failed);
    nsga2_report_number(self->gens, hv);
    fputc('\n', self->gens);
}

static void s_array(FILE *f, const double *v, size_t n)
{
    fputc('[', f);
    for (size_t i = 0; i < n; i++) {
        if (i)
            fputs(", ", f);
        nsga2_report_number(f, v[i]);
    }
    fputc(']', f);
}

/* genome NULL: the line carries no genome nor seed (population.jsonl, kept
 * small). The seed is a string: JSON numbers lose integers past 2^53. */
static void s_line(FILE *f, size_t gen, size_t rank, const double *fitness, size_t m,
                   const double *genome, size_t n, uint64_t seed)
{
    fprintf(f, "{\"generation\": %zu, \"rank\": %zu, \"status\": \"%s\", \"fitness\": ", gen, rank,
            fitness ? "ok" : "failed");
    if (fitness)
        s_array(f, fitness, m);
    else
        fputs("null", f);
    if (genome) {
        fputs(", \"genome\": ", f);
        s_array(f, genome, n);
        fprintf(f, ", \"seed\": \"%llu\"", (unsigned long long)seed);
    }
    fputs("}\n", f);
}

void nsga2_report_individual(nsga2_report_t *self, size_t gen, size_t rank, const double *fitness,
                             size_t m, const double *genome, size_t n, uint64_t seed, int to_front)
{
    s_line(self->pop, gen, rank, fitness, m, NULL, 0, 0);
    if (!to_front || !fitness)
        return;
    s_line(self->front_jsonl, gen, rank, fitness, m, genome, n, seed);
    if (!self->front_header) {
        for (size_t j = 0; j < m; j++)
            fprintf(self->front_csv, "%sf%zu", j ? "," : "", j + 1);
        for (size_t i = 0; i < n; i++)
            fprintf(self->front_csv, ",x%zu", i + 1);
        fputc('\n', self->front_csv);
        self->front_header = 1;
    }
    for (size_t j = 0; j < m; j++) {
        if (j)
            fputc(',', self->front_csv);
        nsga2_report_number(self->front_csv, fitness[j]);
    }
    for (size_t i = 0; i < n; i++) {
        fputc(',', self->front_csv);
        nsga2_report_number(self->front_csv, genome[i]);
    }
    fputc('\n', self->front_csv);
}
