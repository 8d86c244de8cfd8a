/* limits.h: hard caps that every decoder checks before it allocates or reads.
 * The defaults are generous for real searches and small enough that no single
 * message can exhaust a broker. Daemons may lower (never raise past the
 * PROTO_MAX_* ceilings) through proto_limits_t. */
#ifndef PROTO_LIMITS_H
#define PROTO_LIMITS_H

#include <assert.h>
#include <stddef.h>
#include <stdint.h>

#define PROTO_VERSION 2

#define PROTO_MAX_MESSAGE_BYTES (64u * 1024u * 1024u) /* one ZeroMQ message */
#define PROTO_MAX_GENOME_BYTES (1u * 1024u * 1024u)   /* one genome */
#define PROTO_MAX_BATCH_ITEMS 100000u                 /* items in one message */
#define PROTO_MAX_OBJECTIVES 64u                      /* fitness vector length */
#define PROTO_MAX_NAME_BYTES 128u    /* plugin, run id, worker, host, arch */
#define PROTO_MAX_PARAMS_BYTES 65536u /* canonical params JSON */
#define PROTO_MAX_ERROR_BYTES 1024u   /* error texts */
#define PROTO_MAX_PLUGINS 256u        /* plugins one worker reports */
#define PROTO_MAX_LIST 100000u        /* workers, runs, tags in one message */
#define PROTO_MAX_REPLICATES 10000u
#define PROTO_MAX_WEIGHT 1000u /* a run's fair-share weight (SUBMIT.weight) */
#define PROTO_MAX_SEED_PARAMS 16u /* seed params one plugin lists (fitfarm_plugin.h) */

#define PROTO_KEY_BYTES 32u
#define PROTO_DIGEST_BYTES 32u

static_assert(PROTO_MAX_GENOME_BYTES < PROTO_MAX_MESSAGE_BYTES, "a genome must fit a message");
static_assert(PROTO_MAX_PARAMS_BYTES < PROTO_MAX_MESSAGE_BYTES, "params must fit a message");

/* Limits a decoder enforces. Each field is at most its PROTO_MAX_* ceiling. */
typedef struct {
    uint32_t message_bytes;
    uint32_t genome_bytes;
    uint32_t batch_items;
    uint32_t objectives;
    uint32_t name_bytes;
    uint32_t params_bytes;
    uint32_t error_bytes;
} proto_limits_t;

/* The defaults: every field at its ceiling. */
proto_limits_t proto_limits_default(void);

#endif
