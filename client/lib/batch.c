/* batch.c: batches of genomes for one plugin, their f64 encoding, and the
 * results stored per (genome, replicate) slot as they arrive.
 *
 * Not here: tags, chunks and sending (run.c), and fitfarm_batch_destroy
 * (run.c too: it unlinks the batch from its run first). Nothing here reads
 * a run: the batch's run pointer belongs to run.c. */
#include <stdlib.h>
#include <string.h>

#include "batch.h"
#include "sized.h"
#include "params.h"
#include "version.h"

FITFARM_API int fitfarm_batch_new(const char *plugin, const char *params_json, unsigned replicates,
                                  fitfarm_batch_t **out)
{
    if (!out)
        return FITFARM_EINVAL;
    *out = NULL;
    if (!plugin || !*plugin || strlen(plugin) > PROTO_MAX_NAME_BYTES || replicates == 0 ||
        replicates > PROTO_MAX_REPLICATES)
        return FITFARM_EINVAL;
    /* "name@constraint" goes to the broker as it is (it resolves the
     * version); a malformed constraint is the caller's to fix now. The name
     * itself is the broker's to judge: it lists the names it has. */
    char name[PROTO_MAX_NAME_BYTES + 1];
    const char *constraint;
    if (strchr(plugin, '@') &&
        proto_plugin_ref_split(plugin, name, sizeof name, &constraint, NULL, 0) != 0)
        return FITFARM_EINVAL;
    fitfarm_batch_t *self = calloc(1, sizeof *self);
    if (!self)
        return FITFARM_ENOMEM;
    self->replicates = replicates;
    self->plugin = strdup(plugin);
    char err[200];
    /* Canonical params make {"n":30} and { "n" : 30 } one key at the broker. */
    int prc = proto_params_canonical(params_json, &self->params, err, sizeof err);
    if (!self->plugin || prc != 0) {
        /* The canonicaliser does not tell out-of-memory from bad JSON; the
         * latter is what a caller can fix, so say that. */
        int rc = self->plugin ? FITFARM_EINVAL : FITFARM_ENOMEM;
        client_batch_free(self);
        return rc;
    }
    *out = self;
    return FITFARM_OK;
}

static long s_add(fitfarm_batch_t *self, uint8_t *genome, size_t n)
{
    if (self->n == self->cap) {
        size_t cap = self->cap ? self->cap * 2 : 64;
        uint8_t **g = realloc(self->genomes, cap * sizeof *g);
        if (!g)
            return FITFARM_ENOMEM;
        self->genomes = g;
        uint32_t *l = realloc(self->genome_len, cap * sizeof *l);
        if (!l)
            return FITFARM_ENOMEM;
        self->genome_len = l;
        self->cap = cap;
    }
    self->genomes[self->n] = genome;
    self->genome_len[self->n] = (uint32_t)n;
    return (long)self->n++;
}

static int s_addable(const fitfarm_batch_t *self, size_t n_bytes)
{
    /* Added after submit, a genome would have no slots and no tags. */
    return self && !self->slots && n_bytes > 0 && n_bytes <= PROTO_MAX_GENOME_BYTES &&
           (self->n + 1) * (uint64_t)self->replicates <= UINT32_MAX;
}

FITFARM_API long fitfarm_batch_add_f64(fitfarm_batch_t *batch, const double *genome, size_t n)
{
    if (!genome || n > PROTO_MAX_GENOME_BYTES / 8 || !s_addable(batch, n * 8))
        return FITFARM_EINVAL;
    uint8_t *bytes = malloc(n * 8);
    if (!bytes)
        return FITFARM_ENOMEM;
    /* The wire genome is little-endian IEEE 754 whatever this machine is. */
    for (size_t i = 0; i < n; i++) {
        uint64_t bits;
        memcpy(&bits, &genome[i], sizeof bits);
        for (int b = 0; b < 8; b++)
            bytes[i * 8 + (size_t)b] = (uint8_t)(bits >> (8 * b));
    }
    long rc = s_add(batch, bytes, n * 8);
    if (rc < 0)
        free(bytes);
    return rc;
}

FITFARM_API long fitfarm_batch_add_bytes(fitfarm_batch_t *batch, const void *genome, size_t n)
{
    if (!genome || !s_addable(batch, n))
        return FITFARM_EINVAL;
    uint8_t *bytes = malloc(n);
    if (!bytes)
        return FITFARM_ENOMEM;
    memcpy(bytes, genome, n);
    long rc = s_add(batch, bytes, n);
    if (rc < 0)
        free(bytes);
    return rc;
}

FITFARM_API size_t fitfarm_batch_size(const fitfarm_batch_t *batch)
{
    return batch ? batch->n : 0;
}

FITFARM_API unsigned fitfarm_batch_replicates(const fitfarm_batch_t *batch)
{
    return batch ? batch->replicates : 0;
}

FITFARM_API size_t fitfarm_batch_arrived(const fitfarm_batch_t *batch)
{
    return batch ? batch->arrived : 0;
}

int client_batch_prepare(fitfarm_batch_t *self)
{
    if (self->slots)
        return FITFARM_OK;
    size_t n_slots = self->n * self->replicates;
    self->slots = calloc(n_slots ? n_slots : 1, sizeof *self->slots);
    return self->slots ? FITFARM_OK : FITFARM_ENOMEM;
}

int client_batch_store(fitfarm_batch_t *self, size_t slot, const proto_result_t *r, uint64_t seed)
{
    client_slot_t *s = &self->slots[slot];
    if (s->state == CLIENT_SLOT_ARRIVED)
        return 0; /* at-least-once on the wire: a duplicate */
    double *fitness = NULL;
    char *error = NULL;
    if (r->n_fitness > 0) {
        fitness = malloc(r->n_fitness * sizeof *fitness);
        if (!fitness)
            return FITFARM_ENOMEM;
        memcpy(fitness, r->fitness, r->n_fitness * sizeof *fitness);
    }
    if (r->error && r->error[0]) {
        error = strdup(r->error);
        if (!error) {
            free(fitness);
            return FITFARM_ENOMEM;
        }
    }
    const char *worker = r->worker && r->worker[0] ? client_names_put(&self->names, r->worker) : "";
    const char *host = r->host && r->host[0] ? client_names_put(&self->names, r->host) : "";
    if (!worker || !host) {
        free(fitness);
        free(error);
        return FITFARM_ENOMEM;
    }
    s->worker = worker;
    s->host = host;
    s->cpu_seconds = r->cpu_seconds;
    s->peak_rss_kb = r->peak_rss_kb;
    s->finished_at = r->finished_at;
    s->state = CLIENT_SLOT_ARRIVED;
    s->status = (uint8_t)r->status;
    s->cached = r->cached ? 1 : 0;
    s->seed = seed;
    memcpy(s->key, r->key, PROTO_KEY_BYTES);
    s->n_fitness = r->n_fitness;
    s->fitness = fitness;
    s->error = error;
    self->arrived++;
    return 1;
}

void client_batch_fill(const fitfarm_batch_t *self, size_t slot, fitfarm_result_t *out)
{
    const client_slot_t *s = &self->slots[slot];
    fitfarm_result_t full;
    memset(&full, 0, sizeof full);
    full.size = out->size;
    full.batch = self;
    full.index = slot / self->replicates;
    full.replicate = (unsigned)(slot % self->replicates);
    full.status = s->status;
    full.cached = s->cached;
    full.seed = s->seed;
    memcpy(full.key, s->key, sizeof full.key);
    full.n_fitness = s->n_fitness;
    full.fitness = s->fitness;
    full.error = s->error ? s->error : "";
    full.worker = s->worker ? s->worker : "";
    full.host = s->host ? s->host : "";
    full.cpu_seconds = s->cpu_seconds;
    full.peak_rss_kb = s->peak_rss_kb;
    full.finished_at = s->finished_at;
    CLIENT_COPY_OUT(out, full);
}

FITFARM_API int fitfarm_batch_result(const fitfarm_batch_t *batch, size_t index, unsigned r,
                                     fitfarm_result_t *out)
{
    if (!batch || !out || out->size == 0 || index >= batch->n || r >= batch->replicates)
        return FITFARM_EINVAL;
    size_t slot = index * batch->replicates + r;
    if (!batch->slots || batch->slots[slot].state != CLIENT_SLOT_ARRIVED)
        return FITFARM_ETIMEDOUT;
    client_batch_fill(batch, slot, out);
    return FITFARM_OK;
}

void client_batch_free(fitfarm_batch_t *self)
{
    if (!self)
        return;
    if (self->slots) {
        size_t n_slots = self->n * self->replicates;
        for (size_t i = 0; i < n_slots; i++) {
            free(self->slots[i].fitness);
            free(self->slots[i].error);
        }
        free(self->slots);
    }
    client_names_fini(&self->names);
    for (size_t i = 0; i < self->n; i++)
        free(self->genomes[i]);
    free(self->genomes);
    free(self->genome_len);
    free(self->plugin);
    free(self->params);
    free(self);
}

size_t client_batch_in_flight(const fitfarm_batch_t *batch)
{
    size_t n = 0, total = batch->slots ? batch->n * batch->replicates : 0;
    for (size_t i = 0; i < total; i++)
        n += batch->slots[i].state == CLIENT_SLOT_ACCEPTED;
    return n;
}
