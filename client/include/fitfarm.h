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
typedef struct fitfarm_status fitfarm_status_t;

/* ABI growth. Every public struct starts with `size`, which the caller sets to
 * sizeof the struct it was compiled with (the FITFARM_*_INIT macros do it).
 * The library reads and writes only that many bytes, so a program built
 * against an older header keeps working when fields are added at the end. A
 * size of 0 is refused with FITFARM_EINVAL. */

/* How to reach a pool. Initialise with FITFARM_OPTIONS_INIT, then set what
 * you need. */
typedef struct {
    size_t size;            /* sizeof(fitfarm_options_t) */
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
#define FITFARM_OPTIONS_INIT {.size = sizeof(fitfarm_options_t)}

/* Connects (or starts the embedded pool: the fitfarm-broker and
 * fitfarm-worker programs as child processes on this machine, ended by
 * fitfarm_client_destroy, or by themselves when this process dies). Never
 * forks the caller's process image. Blocks until the pool answers or
 * options->connect_timeout_ms passes. On success *out is a new client the
 * caller destroys. On failure *out is NULL; if errbuf is not NULL the sentence
 * is written there. */
FITFARM_API int fitfarm_client_new(const fitfarm_options_t *options, fitfarm_client_t **out,
                                   char *errbuf, size_t errlen);
/* Disconnects, stops an embedded pool, frees. Accepts NULL. */
FITFARM_API void fitfarm_client_destroy(fitfarm_client_t **self_p);
/* The last error's sentence; borrowed, valid until the next call on self. */
FITFARM_API const char *fitfarm_client_error(const fitfarm_client_t *self);
/* The endpoint the client talks to (the embedded pool's ipc:// endpoint when
 * embedded); borrowed, valid until the client is destroyed. */
FITFARM_API const char *fitfarm_client_endpoint(const fitfarm_client_t *self);

/* ---- embedding in the caller's event loop ------------------------------
 * For callers with their own loop (select, poll, epoll, asyncio): wait until
 * fd is readable or fitfarm_client_next_timeout milliseconds pass, then call
 * fitfarm_client_process, then read results with fitfarm_poll(run, &r, 0).
 * The descriptor is edge-triggered (it is ZeroMQ's ZMQ_FD): always call
 * fitfarm_client_process after waking, whatever the reason, and do not read
 * from or write to the descriptor yourself. */

/* Writes the descriptor to *fd. Returns 0 or a code. */
FITFARM_API int fitfarm_client_fd(fitfarm_client_t *self, int *fd);
/* Milliseconds until the library has timed work to do (a re-send, a
 * retry), 0 if it has work now, -1 if none is pending. Never blocks. */
FITFARM_API int fitfarm_client_next_timeout(fitfarm_client_t *self);
/* Does all the work that is due without blocking: reads what arrived, sends
 * what waits (ACCEPTED answers, results and acknowledgements), runs timers.
 * Returns the number of messages handled (>= 0) or a code. */
FITFARM_API int fitfarm_client_process(fitfarm_client_t *self);

/* Run options. Initialise with FITFARM_RUN_OPTIONS_INIT. */
typedef struct {
    size_t size;        /* sizeof(fitfarm_run_options_t) */
    const char *run_id; /* NULL: a new random id */
    uint64_t seed;      /* run seed: every evaluation seed derives from it */
    int seed_mode;      /* 0 = per genome (default), 1 = common random numbers */
    int no_cache;       /* evaluate again even if the store has the result */
    int replay;         /* answer only from the store; never simulate */
    unsigned timeout_s; /* per-evaluation time limit; 0 = the worker's default */
    unsigned attempts;  /* tries of an evaluation that crashes or times out; 0 = the broker's default (3) */
    /* Resuming: a request this run recorded as crashed or timed out is
     * evaluated again (its new result is recorded for the run's replay).
     * Without it only a larger timeout_s retries a recorded time-out. */
    int retry_failed;
    /* The run's share of the pool against the other runs queued at the same
     * time: the broker serves runs round robin, weight jobs from this one
     * per round; 0 = 1. At most 1000. Added after the struct's first
     * release: a caller built before it passes a smaller size and gets 1. */
    unsigned weight;
} fitfarm_run_options_t;
#define FITFARM_RUN_OPTIONS_INIT {.size = sizeof(fitfarm_run_options_t)}

/* Opens (or resumes, if run_id exists) a run. The run borrows client, which
 * must outlive it. Does not block. Caller destroys *out. */
FITFARM_API int fitfarm_run_open(fitfarm_client_t *client, const fitfarm_run_options_t *options,
                                 fitfarm_run_t **out);
/* Borrowed, valid until the run is destroyed. */
FITFARM_API const char *fitfarm_run_id(const fitfarm_run_t *run);
FITFARM_API void fitfarm_run_destroy(fitfarm_run_t **run_p);

/* Counters of a run since it was opened in this process. */
typedef struct {
    size_t size;         /* sizeof(fitfarm_run_stats_t) */
    uint64_t submitted;  /* requests (genome x replicate) handed to the library */
    uint64_t accepted;   /* requests the broker holds durably */
    uint64_t delivered;  /* results handed to the caller (each once) */
    uint64_t cached;     /* of those, answered from the store without simulating */
    uint64_t duplicates; /* results that arrived again and were dropped */
    uint64_t resent;     /* requests re-sent after a reconnect or a refusal */
} fitfarm_run_stats_t;
#define FITFARM_RUN_STATS_INIT {.size = sizeof(fitfarm_run_stats_t)}
FITFARM_API int fitfarm_run_stats(const fitfarm_run_t *run, fitfarm_run_stats_t *out);

/* A batch of genomes for one plugin, params and replicate count.
 * plugin is "name", or "name@VERSION" for the highest version the broker
 * knows that is VERSION or starts with VERSION and a dot ("granular@1":
 * 1, 1.2, 1.10, never 10); the broker resolves it when it accepts the batch
 * and sends its jobs only to workers carrying that version. "name" alone is
 * the first version the broker's store saw. FITFARM_EINVAL for an empty
 * VERSION or one with blanks or non-ASCII bytes. params_json NULL means "{}".
 * Caller destroys *out. */
FITFARM_API int fitfarm_batch_new(const char *plugin, const char *params_json, unsigned replicates,
                                  fitfarm_batch_t **out);
/* Adds a genome of n doubles (copied). Returns its index (>= 0) or a code. */
FITFARM_API long fitfarm_batch_add_f64(fitfarm_batch_t *batch, const double *genome, size_t n);
/* Adds an opaque genome of n bytes (copied). Returns its index or a code. */
FITFARM_API long fitfarm_batch_add_bytes(fitfarm_batch_t *batch, const void *genome, size_t n);
FITFARM_API size_t fitfarm_batch_size(const fitfarm_batch_t *batch); /* genomes */
FITFARM_API unsigned fitfarm_batch_replicates(const fitfarm_batch_t *batch);
/* Results that arrived so far (genome x replicate), of size x replicates. */
FITFARM_API size_t fitfarm_batch_arrived(const fitfarm_batch_t *batch);
FITFARM_API void fitfarm_batch_destroy(fitfarm_batch_t **batch_p);

/* One result. Pointers are borrowed from the batch, valid until it is
 * destroyed. Set size (FITFARM_RESULT_INIT) before passing it to be filled. */
typedef struct {
    size_t size;        /* sizeof(fitfarm_result_t) */
    const fitfarm_batch_t *batch;
    size_t index;       /* genome index in its batch */
    unsigned replicate; /* 0 .. replicates-1 */
    int status;         /* FITFARM_STATUS_* */
    int cached;         /* answered from the store without simulating */
    uint64_t seed;      /* this request's own evaluation seed, as the broker derived it */
    uint8_t key[32];    /* content key (BLAKE2b-256) */
    size_t n_fitness;
    const double *fitness;
    const char *error; /* "" when none */
    /* Provenance: who computed the result and what it cost (for a cached
     * answer, the evaluation that first computed it); "" and 0 where the
     * store did not record it. Borrowed like fitness. */
    const char *worker; /* the worker's name */
    const char *host;   /* its host name */
    double cpu_seconds; /* CPU time of the evaluation, as the worker measured it */
    uint64_t peak_rss_kb; /* peak resident set of the evaluating child, KiB */
    double finished_at; /* Unix time (seconds) the broker recorded the result */
} fitfarm_result_t;
#define FITFARM_RESULT_INIT {.size = sizeof(fitfarm_result_t)}

typedef void (*fitfarm_progress_cb)(size_t done, size_t total, void *arg);

/* Submits batch and blocks until every result is in or timeout_ms passes
 * (negative: no limit). progress is called (may be NULL) as results arrive.
 * Results are then read with fitfarm_batch_result. A batch is evaluated once;
 * after a time-out, calling it again with the same batch goes on waiting.
 * A batch larger than the broker's queue cap for its run is sent in parts:
 * what the broker refused as "queue full" is sent again while the part it
 * took drains (FITFARM_EQUEUEFULL only when none of the batch is queued,
 * i.e. other work fills the queue). */
FITFARM_API int fitfarm_evaluate(fitfarm_run_t *run, fitfarm_batch_t *batch,
                                 fitfarm_progress_cb progress, void *arg, int timeout_ms);

/* Streaming: sends batch and waits up to timeout_ms (negative: no limit) for
 * the broker to accept it. timeout_ms 0 returns at once after handing the
 * batch to the socket: acceptance then happens in the background and a
 * refusal is reported by the next fitfarm_poll. On FITFARM_ETIMEDOUT the batch
 * is still on its way: call fitfarm_submit again (same batch) to wait more.
 * On a refusal (FITFARM_EREFUSED, EPLUGIN, EQUEUEFULL, ENOTRECORDED),
 * fitfarm_refusal says which request. The batch must live until all its
 * results were polled. */
FITFARM_API int fitfarm_submit(fitfarm_run_t *run, fitfarm_batch_t *batch, int timeout_ms);
/* Waits up to timeout_ms (negative: no limit; 0: just look) for the next
 * result of any submitted batch of run. Returns 1 and fills *out, 0 on
 * time-out, or a code. Each result is returned exactly once. */
FITFARM_API int fitfarm_poll(fitfarm_run_t *run, fitfarm_result_t *out, int timeout_ms);

/* Reads the result of genome index, replicate r after it arrived. Returns 0,
 * FITFARM_EINVAL for indices out of range, or FITFARM_ETIMEDOUT if it has not
 * arrived yet. */
FITFARM_API int fitfarm_batch_result(const fitfarm_batch_t *batch, size_t index, unsigned r,
                                     fitfarm_result_t *out);

/* The last refusal of run, as the broker stated it (structured, no text to
 * parse): which request it named, if any. */
typedef struct {
    size_t size;        /* sizeof(fitfarm_refusal_t) */
    int code;           /* the FITFARM_E* code returned for it; 0 when none */
    int has_request;    /* 1 when the broker named one request */
    const fitfarm_batch_t *batch; /* the refused request's batch, or NULL */
    size_t index;       /* its genome index */
    unsigned replicate; /* its replicate */
    const char *text;   /* the broker's sentence; borrowed, valid until the next call on run */
} fitfarm_refusal_t;
#define FITFARM_REFUSAL_INIT {.size = sizeof(fitfarm_refusal_t)}
FITFARM_API int fitfarm_refusal(const fitfarm_run_t *run, fitfarm_refusal_t *out);

/* ---- pool status -------------------------------------------------------- */

/* Asks the broker for its status and waits up to timeout_ms (negative: no
 * limit). On success *out is a snapshot the caller destroys. */
FITFARM_API int fitfarm_status_get(fitfarm_client_t *client, int timeout_ms,
                                   fitfarm_status_t **out);
FITFARM_API void fitfarm_status_destroy(fitfarm_status_t **self_p);

typedef struct {
    size_t size;        /* sizeof(fitfarm_worker_info_t) */
    const char *name, *host, *arch;
    unsigned slots, busy;
    size_t n_plugins;
    const char *const *plugins; /* "name@version" */
    /* Appended (the size field says whether a caller's struct has them): */
    double speed;      /* its calibration score at start: millions of rounds per
                        * second of a fixed arithmetic loop on one core; 0 = not
                        * measured. Compares machines, not plugins. */
    const char *state; /* "active", "draining" (stopping: its running evaluations
                        * finish), or "paused: " and why (its owner's hours or load) */
    /* n_plugins values: the median wall seconds of its last evaluations of
     * plugins[i] (up to 31), 0 = none measured yet. */
    const double *median_seconds;
} fitfarm_worker_info_t;
#define FITFARM_WORKER_INFO_INIT {.size = sizeof(fitfarm_worker_info_t)}

typedef struct {
    size_t size;        /* sizeof(fitfarm_run_info_t) */
    const char *run_id;
    uint64_t queued;    /* evaluations waiting for a worker */
    uint64_t running;   /* evaluations on a worker */
    uint64_t done;      /* requests answered */
    uint64_t evaluated; /* evaluations this run paid for */
    uint64_t cached;    /* requests answered from a stored result */
    uint64_t failed;    /* requests answered with a status other than ok */
} fitfarm_run_info_t;
#define FITFARM_RUN_INFO_INIT {.size = sizeof(fitfarm_run_info_t)}

/* Counts, and entry i (0-based) of each list. Pointers are borrowed from the
 * snapshot. The getters return 0, or FITFARM_EINVAL for i out of range. */
FITFARM_API size_t fitfarm_status_n_workers(const fitfarm_status_t *self);
FITFARM_API int fitfarm_status_worker(const fitfarm_status_t *self, size_t i,
                                      fitfarm_worker_info_t *out);
FITFARM_API size_t fitfarm_status_n_runs(const fitfarm_status_t *self);
FITFARM_API int fitfarm_status_run(const fitfarm_status_t *self, size_t i, fitfarm_run_info_t *out);
FITFARM_API size_t fitfarm_status_n_warnings(const fitfarm_status_t *self);
/* NULL for i out of range. */
FITFARM_API const char *fitfarm_status_warning(const fitfarm_status_t *self, size_t i);

#ifdef __cplusplus
}
#endif
#endif
