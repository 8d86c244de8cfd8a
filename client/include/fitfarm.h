/* fitfarm.h: the public C API of libfitfarm. Nothing else under client/ is API.
 *
 * An optimizer connects to a broker (or starts an embedded local pool on this
 * machine), opens a run (id and seed), builds batches of genomes for a plugin,
 * and either evaluates a batch blocking (with a progress callback) or submits
 * batches and polls results as they finish.
 *
 * Conventions: every call returns 0 or a negative FITFARM_E* code (never "-1
 * and errno"); fitfarm_client_error() gives the last error's sentence. No
 * global state: objects of different clients may be used from different
 * threads, one client and its runs from one thread at a time. Every object has
 * a destroy that accepts NULL and sets the caller's pointer to NULL. The
 * library never aborts and never prints. */
#ifndef FITFARM_H
#define FITFARM_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#if defined(FITFARM_BUILDING)
#define FITFARM_API __attribute__((visibility("default")))
#else
#define FITFARM_API
#endif

enum {
    FITFARM_OK = 0,
    FITFARM_EINVAL = -1,    /* caller misuse: bad argument */
    FITFARM_ENOMEM = -2,    /* out of memory */
    FITFARM_ETIMEDOUT = -3, /* the time-out passed */
    FITFARM_ECONNECT = -4,  /* cannot reach or start the pool */
    FITFARM_EPROTO = -5,    /* the broker answered out of protocol */
    FITFARM_EREFUSED = -6,  /* the broker refused the request (see message) */
    FITFARM_EPLUGIN = -7,   /* the pool has no such plugin (message lists them) */
    FITFARM_EQUEUEFULL = -8,/* over the run's or client's queue cap */
    FITFARM_ESYSTEM = -9,   /* an operating-system call failed */
    FITFARM_ENOTRECORDED = -10, /* replay: the run never saw this request */
};

/* Per-result status, as in the CLI's "status" field. */
enum {
    FITFARM_STATUS_OK = 0,
    FITFARM_STATUS_INVALID = 1,
    FITFARM_STATUS_FAILED = 2,
    FITFARM_STATUS_CRASHED = 3,
    FITFARM_STATUS_TIMEOUT = 4,
};

/* Static text for a code; never NULL. */
FITFARM_API const char *fitfarm_strerror(int code);
/* "ok", "invalid", "failed", "crashed", "timeout"; never NULL. */
FITFARM_API const char *fitfarm_status_name(int status);
/* Library version, e.g. "0.1.0". */
FITFARM_API const char *fitfarm_version(void);

typedef struct fitfarm_client fitfarm_client_t;
typedef struct fitfarm_run fitfarm_run_t;
typedef struct fitfarm_batch fitfarm_batch_t;

/* How to reach a pool. Zero-initialise, then set what you need. */
typedef struct {
    const char *broker;     /* client endpoint, e.g. "tcp://host:5555"; NULL: embedded local pool */
    unsigned slots;         /* embedded pool: worker slots; 0 = online CPUs */
    const char *plugin_dir; /* embedded pool: extra plugin directory; NULL = defaults */
    const char *store_dir;  /* embedded pool: durable store; NULL = private temporary */
    int connect_timeout_ms; /* how long to wait for the pool to answer; 0 = 10000 */
    /* A remote broker is reached with CURVE: this client's secret key file
     * (from `fitfarm keygen`) and the broker's public key file. Without them
     * fitfarm_client_new fails with FITFARM_EINVAL, unless insecure is set and
     * the broker endpoint is ipc://, inproc:// or loopback tcp://. The
     * embedded pool needs none of these. */
    const char *key_file;
    const char *broker_key_file;
    int insecure;
    /* Embedded pool: the folder holding the fitfarm-broker and fitfarm-worker
     * programs. NULL: $FITFARM_PROGRAMS_DIR, else beside the library, else the
     * build tree the library was built in, else the install prefix. */
    const char *programs_dir;
    /* Embedded pool: NULL-terminated list of "NAME=COMMAND" external programs
     * the worker registers as plugins (the exec plugin); NULL for none. */
    const char *const *exec_plugins;
} fitfarm_options_t;

/* Connects (or starts the embedded pool: a broker and a worker process on this
 * machine, ended by fitfarm_client_destroy). Blocks until the pool answers or
 * the time-out passes. On success *out is a new client the caller destroys.
 * On failure *out is NULL; if errbuf is not NULL the sentence is written there. */
FITFARM_API int fitfarm_client_new(const fitfarm_options_t *options, fitfarm_client_t **out,
                                   char *errbuf, size_t errlen);
/* Disconnects, stops an embedded pool, frees. Accepts NULL. */
FITFARM_API void fitfarm_client_destroy(fitfarm_client_t **self_p);
/* The last error's sentence; borrowed, valid until the next call on self. */
FITFARM_API const char *fitfarm_client_error(const fitfarm_client_t *self);

/* Run options. Zero-initialise. */
typedef struct {
    const char *run_id; /* NULL: a new random id */
    uint64_t seed;      /* run seed: every evaluation seed derives from it */
    int seed_mode;      /* 0 = per genome (default), 1 = common random numbers */
    int no_cache;       /* evaluate again even if the store has the result */
    int replay;         /* answer only from the store; never simulate */
    unsigned timeout_s; /* per-evaluation time limit; 0 = the worker's default */
    unsigned attempts;  /* tries of an evaluation that crashes or times out; 0 = the broker's default (3) */
} fitfarm_run_options_t;

/* Opens (or resumes, if run_id exists) a run. The run borrows client, which
 * must outlive it. Caller destroys *out. */
FITFARM_API int fitfarm_run_open(fitfarm_client_t *client, const fitfarm_run_options_t *options,
                                 fitfarm_run_t **out);
/* Borrowed, valid until the run is destroyed. */
FITFARM_API const char *fitfarm_run_id(const fitfarm_run_t *run);
FITFARM_API void fitfarm_run_destroy(fitfarm_run_t **run_p);

/* A batch of genomes for one plugin, params and replicate count.
 * params_json NULL means "{}". Caller destroys *out. */
FITFARM_API int fitfarm_batch_new(const char *plugin, const char *params_json, unsigned replicates,
                                  fitfarm_batch_t **out);
/* Adds a genome of n doubles (copied). Returns its index (>= 0) or a code. */
FITFARM_API long fitfarm_batch_add_f64(fitfarm_batch_t *batch, const double *genome, size_t n);
/* Adds an opaque genome of n bytes (copied). Returns its index or a code. */
FITFARM_API long fitfarm_batch_add_bytes(fitfarm_batch_t *batch, const void *genome, size_t n);
FITFARM_API size_t fitfarm_batch_size(const fitfarm_batch_t *batch); /* genomes */
FITFARM_API void fitfarm_batch_destroy(fitfarm_batch_t **batch_p);

/* One result. Pointers are borrowed from the batch, valid until it is destroyed. */
typedef struct {
    const fitfarm_batch_t *batch;
    size_t index;       /* genome index in its batch */
    unsigned replicate; /* 0 .. replicates-1 */
    int status;         /* FITFARM_STATUS_* */
    int cached;         /* answered from the store without simulating */
    uint64_t seed;
    uint8_t key[32];
    size_t n_fitness;
    const double *fitness;
    const char *error; /* "" when none */
} fitfarm_result_t;

typedef void (*fitfarm_progress_cb)(size_t done, size_t total, void *arg);

/* Submits batch and blocks until every result is in or timeout_ms passes
 * (negative: no limit). progress is called (may be NULL) as results arrive.
 * Results are then read with fitfarm_batch_result. A batch is evaluated once. */
FITFARM_API int fitfarm_evaluate(fitfarm_run_t *run, fitfarm_batch_t *batch,
                                 fitfarm_progress_cb progress, void *arg, int timeout_ms);

/* Streaming: submits batch and returns once the broker has accepted it. The
 * batch must live until all its results were polled. */
FITFARM_API int fitfarm_submit(fitfarm_run_t *run, fitfarm_batch_t *batch);
/* Waits up to timeout_ms (negative: no limit) for the next result of any
 * submitted batch of run. Returns 1 and fills *out, 0 on time-out, or a code.
 * Each result is returned exactly once. */
FITFARM_API int fitfarm_poll(fitfarm_run_t *run, fitfarm_result_t *out, int timeout_ms);

/* Reads the result of genome index, replicate r after it arrived. Returns 0,
 * FITFARM_EINVAL for indices out of range, or FITFARM_ETIMEDOUT if it has not
 * arrived yet. */
FITFARM_API int fitfarm_batch_result(const fitfarm_batch_t *batch, size_t index, unsigned r,
                                     fitfarm_result_t *out);

#ifdef __cplusplus
}
#endif
#endif
