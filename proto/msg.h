/* msg.h: every message between client and broker and between worker and
 * broker, as C structs, and their MessagePack encoding.
 *
 * Wire format. Each ZeroMQ message body (after any ROUTER/DEALER envelope) is
 * exactly one MessagePack array whose first two elements are the protocol
 * version (positive int, PROTO_VERSION) and the message type (positive int,
 * proto_type_t). The remaining elements are fixed per type, listed beside each
 * struct below as [version, type, field, field, ...]. Conventions:
 *   str   MessagePack str, UTF-8 not checked, no NUL bytes allowed
 *   bin   MessagePack bin (genomes, keys, digests)
 *   uint  MessagePack positive int (any width); u64 fields may use the full range
 *   f64   MessagePack float 64 (float 32 is refused: bits matter)
 *   bool  MessagePack true/false
 * Decoding is strict: wrong version, unknown type, wrong element count, wrong
 * element type, any size past proto_limits_t, trailing bytes after the array,
 * or a nested array whose length disagrees with the stated count are errors.
 *
 * Not here: sockets, envelopes, files, clocks. This module is pure code. */
#ifndef PROTO_MSG_H
#define PROTO_MSG_H

#include <stddef.h>
#include <stdint.h>

#include "limits.h"

typedef enum {
    /* client -> broker */
    PROTO_SUBMIT = 1,
    PROTO_ACK = 2,
    PROTO_STATUS_REQ = 3,
    /* broker -> client */
    PROTO_ACCEPTED = 10,
    PROTO_RESULTS = 11,
    PROTO_REFUSED = 12,
    PROTO_STATUS = 13,
    /* worker -> broker */
    PROTO_HELLO = 20,
    PROTO_CREDIT = 21,
    PROTO_DONE = 22,
    PROTO_BYE = 23,
    PROTO_HAND_BACK = 24,
    /* broker -> worker */
    PROTO_JOBS = 30,
    PROTO_REHELLO = 31,
    PROTO_CANCEL = 32,
    /* both directions on the workers endpoint (and client <-> broker) */
    PROTO_HEARTBEAT = 40,
} proto_type_t;

/* Outcome of one evaluation. Wire value is the enum value. */
typedef enum {
    PROTO_STATUS_OK = 0,
    PROTO_STATUS_INVALID = 1, /* the request was bad (wrong genome length, params) */
    PROTO_STATUS_FAILED = 2,  /* the plugin reported an error or non-finite fitness */
    PROTO_STATUS_CRASHED = 3, /* the child died from a signal or exited */
    PROTO_STATUS_TIMEOUT = 4, /* the evaluation ran past its time limit */
    PROTO_STATUS_COUNT_
} proto_job_status_t; /* named apart from proto_status_t, the STATUS message */

/* "ok", "invalid", ... ; "unknown" for anything else. Never NULL. */
const char *proto_status_name(int status);

typedef enum {
    PROTO_SEED_GENOME = 0, /* seed from run seed, genome digest, replicate */
    PROTO_SEED_COMMON = 1, /* seed from run seed and replicate only (common random numbers) */
} proto_seed_mode_t;

/* Submit flags. */
#define PROTO_SUBMIT_NO_CACHE 0x1u /* evaluate again even if the key is stored */
#define PROTO_SUBMIT_REPLAY 0x2u   /* answer only from the store, never simulate */
#define PROTO_SUBMIT_RETRY_FAILED 0x4u /* a recorded crashed or timed-out answer is evaluated again */

/* Refusal codes carried by PROTO_REFUSED. */
typedef enum {
    PROTO_REFUSE_BAD_MESSAGE = 1,   /* undecodable or out of protocol */
    PROTO_REFUSE_UNKNOWN_PLUGIN = 2,/* text names the plugins the pool has */
    PROTO_REFUSE_BAD_PARAMS = 3,
    PROTO_REFUSE_QUEUE_FULL = 4,
    PROTO_REFUSE_NOT_RECORDED = 5,  /* replay: the run never saw this request */
    PROTO_REFUSE_SHUTTING_DOWN = 6,
    PROTO_REFUSE_RUN_MISMATCH = 7,  /* run exists with another seed or seed mode */
    PROTO_REFUSE_STORE = 8,         /* the broker's store cannot write (text says why) */
    PROTO_REFUSE_NOT_PERMITTED = 9, /* the run belongs to another client key */
} proto_refuse_t;

/* ---- client -> broker -------------------------------------------------- */

/* One genome and replicate of a batch. tag is the client's own id for the
 * request, unique within the run; results come back under it. */
typedef struct {
    uint64_t tag;
    uint32_t replicate;
    uint32_t genome_len; /* bytes */
    uint8_t *genome;     /* f64 genomes: little-endian IEEE 754 doubles */
} proto_item_t;          /* wire: [tag uint, replicate uint, genome bin] */

/* [v, SUBMIT, run_id str, run_seed uint, seed_mode uint, flags uint,
 *  timeout_ms uint, attempts uint, batch_tag uint, plugin str, params str,
 *  items array of proto_item_t, weight uint] */
typedef struct {
    char *run_id;
    uint64_t run_seed;
    uint32_t seed_mode; /* proto_seed_mode_t */
    uint32_t flags;     /* PROTO_SUBMIT_* */
    uint32_t timeout_ms; /* per evaluation; 0 = the worker's default for the plugin */
    uint32_t attempts;   /* tries of a job that crashes or times out; 0 = the broker's default */
    uint64_t batch_tag; /* echoed in ACCEPTED / REFUSED */
    char *plugin;
    char *params; /* canonical JSON text (proto_params_canonical) */
    uint32_t n_items;
    proto_item_t *items;
    /* the run's share of the pool against other runs, 1..PROTO_MAX_WEIGHT
     * (the broker serves a run of weight W W jobs per round); the encoder
     * sends 0 as 1 */
    uint32_t weight;
} proto_submit_t;

/* [v, ACK, run_id str, tags array of uint]: the client has delivered these
 * results to the optimizer; the broker need not send them again. */
typedef struct {
    char *run_id;
    uint32_t n_tags;
    uint64_t *tags;
} proto_ack_t;

/* [v, STATUS_REQ]: no fields. */

/* ---- broker -> client -------------------------------------------------- */

/* [v, ACCEPTED, run_id str, batch_tag uint, n_accepted uint]: the batch is
 * durable (from the store issue on) and will be answered. */
typedef struct {
    char *run_id;
    uint64_t batch_tag;
    uint32_t n_accepted;
} proto_accepted_t;

/* One result: [tag uint, status uint, cached bool, seed uint, key bin(32),
 *  fitness array of f64, error str, worker str, host str, cpu_seconds f64,
 *  peak_rss_kb uint, finished_at f64]. The last five are the provenance of
 *  the evaluation that computed it (for a cached answer, the original one):
 *  "" / 0 when the broker answered without a worker (an invalid request). */
typedef struct {
    uint64_t tag;
    uint32_t status; /* proto_job_status_t */
    uint8_t cached;  /* 0 or 1 */
    uint64_t seed;
    uint8_t key[PROTO_KEY_BYTES];
    uint32_t n_fitness;
    double *fitness;
    char *error;  /* "" when none */
    char *worker; /* the worker's name */
    char *host;   /* the worker's host name */
    double cpu_seconds;   /* the evaluation's CPU time, as the worker measured it */
    uint64_t peak_rss_kb; /* its child's peak resident set */
    double finished_at;   /* Unix time (s) the broker recorded the result */
} proto_result_t;

/* [v, RESULTS, run_id str, results array of proto_result_t] */
typedef struct {
    char *run_id;
    uint32_t n_results;
    proto_result_t *results;
} proto_results_t;

/* [v, REFUSED, code uint, batch_tag uint, run_id str, text str,
 *  has_tag bool, tag uint]: has_tag says the refusal is about one request,
 *  the one sent under tag (tag is 0 otherwise), so a client names it without
 *  parsing the text. */
typedef struct {
    uint32_t code; /* proto_refuse_t */
    uint64_t batch_tag;
    char *run_id; /* "" when not about a run */
    char *text;
    uint8_t has_tag; /* 0 or 1 */
    uint64_t tag;
} proto_refused_t;

/* Worker as listed by STATUS: [name str, host str, arch str, slots uint,
 *  busy uint, plugins array of str, speed f64, state str, medians array of
 *  f64]: medians[i] is the median wall seconds of plugins[i]'s evaluations on
 *  this worker (broker/timing.h), 0 when not measured; one per plugin. */
typedef struct {
    char *name;
    char *host;
    char *arch;
    uint32_t slots;
    uint32_t busy;
    uint32_t n_plugins;
    char **plugins; /* "name@version" */
    double speed;   /* its HELLO's calibration score; 0 = not measured */
    char *state;    /* "active", "draining", or "paused: " and the worker's reason
                     * (HAND_BACK) */
    double *medians; /* n_plugins of them */
} proto_worker_info_t;

/* Run as listed by STATUS: [run_id str, queued uint, running uint, done uint,
 *  evaluated uint, cached uint, failed uint] */
typedef struct {
    char *run_id;
    uint64_t queued;    /* evaluations waiting for a worker */
    uint64_t running;   /* evaluations on a worker */
    uint64_t done;      /* requests answered */
    uint64_t evaluated; /* evaluations this run paid for (simulated on a worker) */
    uint64_t cached;    /* requests answered from a stored result */
    uint64_t failed;    /* requests answered with a status other than ok */
} proto_run_info_t;

/* [v, STATUS, workers array, runs array, warnings array of str] */
typedef struct {
    uint32_t n_workers;
    proto_worker_info_t *workers;
    uint32_t n_runs;
    proto_run_info_t *runs;
    uint32_t n_warnings;
    char **warnings;
} proto_status_t;

/* ---- worker -> broker -------------------------------------------------- */

/* Plugin flags reported in HELLO. */
#define PROTO_PLUGIN_DETERMINISTIC 0x1u

/* [name str, version str, objectives uint, flags uint, digest bin(32),
 *  seed_params array of str, param_defaults str]
 * param_defaults: the plugin's fitfarm_plugin_param_defaults in canonical
 * form, at most params_bytes; "" when it declares none.
 * seed_params: the plugin's fitfarm_plugin_seed_params, at most
 * PROTO_MAX_SEED_PARAMS names of at most name_bytes each; empty when none.
 * A stochastic plugin's request whose canonical params hold every listed name
 * with the number 0 is keyed without the seed (proto_params_all_zero). */
typedef struct {
    char *name;
    char *version;
    uint32_t objectives; /* default number of objectives (params may change it) */
    uint32_t flags;      /* PROTO_PLUGIN_* */
    uint8_t digest[PROTO_DIGEST_BYTES]; /* BLAKE2b-256 of the shared object file */
    uint32_t n_seed_params;
    char **seed_params; /* NULL when n_seed_params is 0 */
    char *param_defaults; /* canonical JSON object, or "" */
} proto_plugin_info_t;

/* Calibration scores (HELLO.speed): finite, 0 (not measured) to this. */
#define PROTO_MAX_SPEED 1e9

/* [v, HELLO, name str, host str, arch str, slots uint, plugins array,
 *  speed f64]: speed is the worker's calibration score at start (millions of
 *  loop rounds per second, worker/calibrate.h), 0 to PROTO_MAX_SPEED. */
typedef struct {
    char *name;
    char *host;
    char *arch;
    uint32_t slots;
    uint32_t n_plugins;
    proto_plugin_info_t *plugins;
    double speed;
} proto_hello_t;

/* [v, CREDIT, credits uint]: the worker can take this many more jobs. */
typedef struct {
    uint32_t credits;
} proto_credit_t;

/* One finished job: [job_id uint, status uint, fitness array of f64,
 *  cpu_seconds f64, peak_rss_kb uint, error str, wall_seconds f64]:
 *  wall_seconds from the evaluation's start in its child to its answer (the
 *  broker's per-plugin medians and straggler copies, speculate.h). */
typedef struct {
    uint64_t job_id;
    uint32_t status; /* proto_job_status_t */
    uint32_t n_fitness;
    double *fitness;
    double cpu_seconds;
    uint64_t peak_rss_kb;
    char *error; /* "" when none */
    double wall_seconds;
} proto_outcome_t;

/* [v, DONE, credits uint, outcomes array]: finished jobs, plus credits the
 * worker grants at the same time (saves a CREDIT message per turn). */
typedef struct {
    uint32_t credits;
    uint32_t n_outcomes;
    proto_outcome_t *outcomes;
} proto_done_t;

/* [v, BYE]: the worker leaves; its unfinished jobs go back to the queue. */

/* [v, HAND_BACK, reason str, job_ids array of uint, draining bool]: the
 * worker takes no jobs until its next CREDIT, so the broker forgets the
 * credits it holds; the listed jobs (at most batch_items), which the worker
 * held and will never report, go back to the queue with the same seed, not
 * counted as attempts. Either its owner has reclaimed the machine (draining
 * false; reason says how, at most name_bytes, e.g. "outside --hours
 * 08:00-18:00") or it is stopping (draining true: it was asked to stop, its
 * running evaluations finish and are reported, then it says BYE). */
typedef struct {
    char *reason;
    uint32_t n_jobs;
    uint64_t *job_ids;
    uint8_t draining;
} proto_hand_back_t;

/* ---- broker -> worker -------------------------------------------------- */

/* [job_id uint, plugin str, params str, seed uint, timeout_ms uint, genome bin] */
typedef struct {
    uint64_t job_id;
    char *plugin;
    char *params;
    uint64_t seed;
    uint32_t timeout_ms; /* 0: the worker's default for the plugin */
    uint32_t genome_len;
    uint8_t *genome;
} proto_job_t;

/* [v, JOBS, jobs array] */
typedef struct {
    uint32_t n_jobs;
    proto_job_t *jobs;
} proto_jobs_t;

/* [v, CANCEL, job_ids array of uint]: the broker no longer wants these jobs
 * (another copy of each finished first, speculate.h). The worker drops the
 * ones it has not started and kills the children running the others, then
 * grants their credits again; it reports none of them. An id it does not
 * hold (finished and reported meanwhile) is ignored. At most batch_items. */
typedef struct {
    uint32_t n_jobs;
    uint64_t *job_ids;
} proto_cancel_t;

/* [v, REHELLO]: the broker does not know this worker (it restarted, or dropped
 * the registration): send HELLO again and re-announce credits. */

/* [v, HEARTBEAT]: liveness, both ways. */

/* ---- the envelope-free message ----------------------------------------- */

typedef struct {
    uint32_t type; /* proto_type_t */
    union {
        proto_submit_t submit;
        proto_ack_t ack;
        proto_accepted_t accepted;
        proto_results_t results;
        proto_refused_t refused;
        proto_status_t status;
        proto_hello_t hello;
        proto_credit_t credit;
        proto_done_t done;
        proto_hand_back_t hand_back;
        proto_jobs_t jobs;
        proto_cancel_t cancel;
    } u; /* STATUS_REQ, BYE, REHELLO, HEARTBEAT have no fields */
} proto_msg_t;

/* Decode errors. */
typedef enum {
    PROTO_OK = 0,
    PROTO_ETRUNCATED = -1, /* input ends inside an object */
    PROTO_ETYPE = -2,      /* an element has the wrong MessagePack type */
    PROTO_ECOUNT = -3,     /* an array has the wrong number of elements */
    PROTO_ELIMIT = -4,     /* a size or count is past the limits */
    PROTO_EVERSION = -5,   /* protocol version we do not speak */
    PROTO_EUNKNOWN = -6,   /* unknown message type */
    PROTO_ETRAILING = -7,  /* bytes after the message */
    PROTO_EVALUE = -8,     /* a value out of its domain (status, seed mode, NUL in str) */
    PROTO_ENOMEM = -9,
} proto_error_t;

/* Error text of a decode: a code and a sentence naming the field. */
typedef struct {
    int code;       /* proto_error_t */
    char text[160]; /* e.g. "SUBMIT.items[3].genome: 2000000 bytes, limit 1048576" */
} proto_err_t;

/* Decodes one message. On success returns PROTO_OK and *out is a new message
 * the caller destroys with proto_msg_destroy. On failure returns a negative
 * proto_error_t, fills err (if not NULL) and leaves *out NULL. Never reads past
 * buf[len). limits NULL means proto_limits_default(). Thread-safe. */
int proto_msg_decode(const uint8_t *buf, size_t len, const proto_limits_t *limits,
                     proto_msg_t **out, proto_err_t *err);

/* Encodes msg. On success returns PROTO_OK and *out / *out_len is a malloc'd
 * buffer the caller frees with free(). Returns PROTO_ENOMEM on allocation
 * failure, PROTO_EVALUE if msg violates the protocol (e.g. NULL string). */
int proto_msg_encode(const proto_msg_t *msg, uint8_t **out, size_t *out_len);

/* Frees a message from proto_msg_decode, or one built by hand whose every
 * pointer came from malloc; sets *msg_p to NULL. Accepts NULL. */
void proto_msg_destroy(proto_msg_t **msg_p);

/* "SUBMIT", "DONE", ...; "?" for unknown. Never NULL. */
const char *proto_type_name(int type);

#endif
