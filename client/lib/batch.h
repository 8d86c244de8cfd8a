/* batch.h: a batch's private layout (genomes, and one slot per request:
 * genome index x replicate, holding its state and, once arrived, its
 * result). Internal, not API. A batch owns its genomes and its results; the
 * run it was submitted through is borrowed (run.h links and unlinks it). */
#ifndef CLIENT_BATCH_H
#define CLIENT_BATCH_H

#include <stddef.h>
#include <stdint.h>

#include "client/include/fitfarm.h"
#include "msg.h"
#include "names.h"

/* Life of one request slot (genome index, replicate) of a batch. */
enum {
    CLIENT_SLOT_UNSENT = 0,   /* not sent, or sent and refused / timed out */
    CLIENT_SLOT_SENT = 1,     /* in a SUBMIT chunk waiting for ACCEPTED/REFUSED */
    CLIENT_SLOT_ACCEPTED = 2, /* the broker holds it; result not yet here */
    CLIENT_SLOT_ARRIVED = 3,  /* result stored; later copies are duplicates */
};

typedef struct {
    uint8_t state; /* CLIENT_SLOT_* */
    uint8_t status;
    uint8_t cached;
    uint64_t seed;
    uint8_t key[PROTO_KEY_BYTES];
    uint32_t n_fitness;
    double *fitness; /* owned; NULL when n_fitness is 0 */
    char *error;     /* owned; NULL means "" */
    const char *worker, *host; /* in the batch's names; NULL means "" */
    double cpu_seconds;
    uint64_t peak_rss_kb;
    double finished_at;
} client_slot_t;

struct fitfarm_batch {
    char *plugin;
    char *params; /* canonical JSON */
    unsigned replicates;
    size_t n;     /* genomes */
    size_t cap;
    uint8_t **genomes;
    uint32_t *genome_len;
    client_slot_t *slots; /* n * replicates once submitted, index*replicates + r */
    client_names_t names; /* the slots' worker and host names */
    size_t arrived;       /* slots in state ARRIVED */
    int streaming;        /* results also go to the run's poll queue */
    fitfarm_run_t *run;   /* borrowed; NULL until submitted or after the run ended */
    uint64_t tag_base;    /* tag of slot s is tag_base + s */
};

/* Slots the broker holds for this batch (ACCEPTED, result not yet here). */
size_t client_batch_in_flight(const fitfarm_batch_t *batch);
/* Allocates the slots (all UNSENT); 0 or FITFARM_ENOMEM. */
int client_batch_prepare(fitfarm_batch_t *batch);
/* Stores one result with the request's own seed; returns 1 if new, 0 for a
 * duplicate, negative on ENOMEM (nothing stored). */
int client_batch_store(fitfarm_batch_t *batch, size_t slot, const proto_result_t *r,
                       uint64_t seed);
/* Fills out (as far as out->size says) from an arrived slot; borrowed
 * pointers valid until the batch is destroyed. */
void client_batch_fill(const fitfarm_batch_t *batch, size_t slot, fitfarm_result_t *out);
/* Frees a batch no run links any more (fitfarm_batch_destroy, in run.c,
 * unlinks it first). Accepts NULL. */
void client_batch_free(fitfarm_batch_t *batch);

#endif
