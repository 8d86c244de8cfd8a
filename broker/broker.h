/* broker.h: the broker's single entry point, used by fitfarm-broker's main and
 * (and the tests that run a broker in-process). */
#ifndef BROKER_BROKER_H
#define BROKER_BROKER_H

#include <stdint.h>

typedef struct {
    const char *clients_endpoint; /* bind address for clients, e.g. "tcp://127.0.0.1:5555" */
    const char *workers_endpoint; /* bind address for workers */
    const char *store_dir;        /* durable store folder; NULL = in memory only */
    /* The store is scratch, deleted when the broker's owner ends (the
     * embedded pool's private store): commits skip fsync (synchronous=OFF),
     * so a machine crash may lose it, which for scratch loses nothing. */
    int scratch_store;
    /* How long to wait at start for another broker's lock on the store (a
     * predecessor that was just killed and is still ending); 0 = the
     * default, BROKER_DEFAULT_LOCK_WAIT_MS. */
    int lock_wait_ms;
    int liveness_ms;              /* a worker silent this long is dropped; 0 = 5000 */
    int heartbeat_ms;             /* 0 = 1000 */
    unsigned attempts;            /* tries of a job that crashes or times out; 0 = 3 */
    /* Straggler copies (speculate.h): off when no_speculation; a job older
     * than speculate_after x its plugin's median is copied (0 = 1.5). */
    int no_speculation;
    double speculate_after;
    /* Where to write the bound endpoints (after wildcard ports are resolved)
     * as two lines "clients ENDPOINT\nworkers ENDPOINT\n"; NULL = nowhere.
     * Written atomically (temp file + rename) once both are bound. */
    const char *endpoints_file;
    /* Where to write this process's PID once both endpoints listen (removed
     * at exit); NULL = nowhere. A file naming a live process stops the
     * start (pidfile.h). */
    const char *pid_file;
    /* Security (zap.h). CURVE on both endpoints unless insecure; insecure
     * (plaintext) is refused unless both endpoints are ipc://, inproc:// or
     * loopback tcp://. */
    const char *key_file; /* the broker's .secret key file */
    const char *keys_dir; /* folder holding clients.allow and workers.allow */
    int insecure;
    /* Limits against exhaustion; 0 = the default (the proto ceiling, or for
     * the queue caps BROKER_DEFAULT_QUEUED_* and BROKER_DEFAULT_RUNS*;
     * quota.h says what each counts). */
    uint32_t max_message_bytes; /* every message on both sockets (ZMQ_MAXMSGSIZE) */
    uint32_t max_genome_bytes;
    uint32_t max_batch;      /* items in one SUBMIT */
    uint32_t max_objectives; /* fitness values in one result */
    uint32_t max_string_bytes; /* run ids, plugin, worker and host names */
    uint64_t max_queued_per_run;    /* accepted, not yet answered, per run */
    uint64_t max_queued_per_client; /* the same summed over a client key's runs */
    uint64_t max_queued_bytes;          /* queued evaluations' bytes, in all */
    uint64_t max_queued_bytes_per_key;  /* the same for one client key's runs */
    uint64_t max_queued_bytes_per_run;  /* the same for one run */
    uint64_t max_runs;                  /* runs held in RAM, in all */
    uint64_t max_runs_per_key;          /* the same for one client key */
    /* Memory bounds; 0 = the default below. Results owed to a client past
     * the unacked caps stay in the store and are paged back when it can take
     * them; finished results past the cache caps are dropped from RAM and
     * read back from the store on a miss. */
    uint64_t max_unacked_per_run; /* results held in RAM for one run's client */
    uint64_t max_unacked;         /* the same over all runs */
    uint64_t cache_entries;       /* finished results kept in RAM */
    uint64_t cache_bytes;         /* their approximate bytes */
    /* The read end of the starter's lifeline pipe (common/lifeline.h); the
     * broker stops as on SIGTERM when it reports end of file. 0 = none. */
    int lifeline_fd;
    /* Where to serve the metrics page over HTTP ("PORT", "HOST:PORT",
     * "[IPv6]:PORT"; HOST defaults to 127.0.0.1, http.h); NULL = off.
     * The bound URL is a third line "http URL" of the endpoints file. */
    const char *http_address;
} broker_config_t;

#define BROKER_DEFAULT_LOCK_WAIT_MS 10000 /* a killed predecessor ends well within this */
#define BROKER_DEFAULT_QUEUED_PER_RUN 1000000u
#define BROKER_DEFAULT_QUEUED_PER_CLIENT 4000000u
/* Tied to memory (README, "Memory bounds"): a queued evaluation costs its
 * genome plus its record (sizeof(broker_eval_t), about 250 bytes); a run
 * held in RAM about 1 KB with nothing in flight. */
#define BROKER_DEFAULT_QUEUED_BYTES (1024ull * 1024u * 1024u)
#define BROKER_DEFAULT_QUEUED_BYTES_PER_KEY (512ull * 1024u * 1024u)
#define BROKER_DEFAULT_QUEUED_BYTES_PER_RUN (256ull * 1024u * 1024u)
#define BROKER_DEFAULT_RUNS 100000u
#define BROKER_DEFAULT_RUNS_PER_KEY 20000u
#define BROKER_DEFAULT_UNACKED_PER_RUN 100000u
#define BROKER_DEFAULT_UNACKED 1000000u
#define BROKER_DEFAULT_CACHE_ENTRIES 1000000u
#define BROKER_DEFAULT_CACHE_BYTES (256u * 1024u * 1024u)

/* Runs the broker until SIGTERM or SIGINT (handlers installed here set a flag
 * that the loop reads). Returns 0 on a clean stop, or 1 after logging why it
 * could not start or why the stop was not clean (the final store commit
 * failed: results not written, to be evaluated again after a restart). Blocks; not thread-safe (one broker per process). */
int broker_main_run(const broker_config_t *config);

#endif
