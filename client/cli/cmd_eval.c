/* cmd_eval.c: `fitfarm eval`: JSON Lines of genomes in, JSON Lines of
 * results out, in input order, each output line written as soon as every line
 * before it is written. Input is read as it comes (an optimizer may write one
 * generation and wait for its results on the other end of a pipe): whatever
 * has arrived is submitted as a batch when the input pauses or a batch fills.
 *
 * Owns option parsing, the reading loop and the output format. Not here: the
 * line parser (jsonl.c), the protocol (the library). */
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <math.h>
#include <poll.h>
#include <signal.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli_keys.h"
#include "cli_pool.h"
#include "eval_help.h"
#include "eval_lines.h"
#include "cli_util.h"
#include "client/include/fitfarm.h"
#include "commands.h"
#include "common/clock.h"
#include "jsonl.h"
#include "key.h"
#include "params.h"
#include "version.h"

#define EVAL_BATCH_LINES 4096   /* submit once this many lines are waiting */
#define EVAL_READ_BYTES 65536
#define CLI_SUBMIT_WAIT_MS 60000 /* how long the broker may take to accept a batch */
#define EVAL_REPLAY_STOPPED 3 /* s_submit_building: a replay met an unseen line */
#define EVAL_MAX_EXEC 16 /* the worker program's own cap on --exec */
/* Read-ahead bounds: input is read only while fewer than this many lines
 * wait to be printed and fewer than this many results are owed, so memory
 * stays bounded whatever the input (5 million invalid lines, /dev/urandom)
 * and the run's queue at the broker stays far below its default cap
 * (1,000,000 per run). */
#define EVAL_AHEAD_LINES 65536
#define EVAL_AHEAD_SLOTS 262144
#define EVAL_QUEUE_RETRY_MS 500   /* a batch refused as "queue full" is sent again this often */
#define EVAL_QUEUE_NOTE_MS 10000  /* and the wait is reported on stderr this often */



typedef struct {
    /* options */
    const char *plugin, *params, *run_id, *in_path, *out_path, *broker, *plugin_dir, *store;
    const char *seed_mode_name, *aggregate_name;
    int stats, no_cache, replay, seed_mode, local, retry_failed;
    int aggregate; /* 0 none, 1 mean, 2 median */
    uint64_t seed, replicates, slots, timeout_s, attempts, weight;
    const char *exec[EVAL_MAX_EXEC + 1]; /* --exec NAME=CMD, NULL-terminated */
    size_t n_exec;
    /* state */
    FILE *out;
    int in_fd;
    fitfarm_client_t *client;
    fitfarm_run_t *run;
    eval_record_t *records;
    size_t n_records, cap_records;
    size_t cursor;     /* next record to print */
    unsigned cursor_r; /* next replicate of it */
    size_t replay_stop_line; /* replay: the first input line the run never saw, 0 = none */
    fitfarm_batch_t *building;
    fitfarm_batch_t **batches; /* submitted, oldest first; freed once printed */
    size_t *batch_last;        /* last record index of each submitted batch */
    size_t n_batches, cap_batches;
    size_t submitted, printed_slots; /* progress: results expected / printed */
    size_t printed_cached, printed_failed;
    int64_t started_ms, last_result_ms; /* progress: rate and silence */
    int quiet;
    int any_not_ok;
    int progress_tty;
    int64_t progress_at;
    /* backpressure: a batch the broker refused as over its queue cap waits
     * here (its slots keep their tags) and is sent again as the queue drains */
    fitfarm_batch_t *retry;
    int64_t retry_at, retry_noted_at;
    uint64_t retry_count;
    /* 1 until the first batch is accepted, unless the jobs were already
     * said to wait: then the broker's warning (if any) says why they
     * wait, once. */
    int wait_hint;
} eval_t;

static volatile sig_atomic_t s_stop = 0;

static void s_on_signal(int sig)
{
    (void)sig;
    s_stop = 1;
}

static int s_usage(const char *fmt, const char *arg)
{
    fputs("fitfarm eval: ", stderr);
    fprintf(stderr, fmt, arg ? arg : "");
    fputs(" (see fitfarm eval --help)\n", stderr);
    return 2;
}

static int s_parse_args(eval_t *e, int argc, char **argv, int *exit_code)
{
    e->replicates = 1;
    for (int i = 1; i < argc; i++) {
        const char *v = NULL;
        const char *arg = argv[i];
        if (strcmp(arg, "--help") == 0 || strcmp(arg, "-h") == 0) {
            fputs(cli_eval_help, stdout);
            fputs("\nsecurity, with --broker:\n", stdout);
            fputs(cli_keys_help, stdout);
            *exit_code = 0;
            return -1;
        }
#define STR_OPT(name, field)                                                                       \
    if (cli_match_value(argc, argv, &i, name, &v)) {                                               \
        if (!v) {                                                                                  \
            *exit_code = s_usage("%s needs a value", name);                                        \
            return -1;                                                                             \
        }                                                                                          \
        e->field = v;                                                                              \
        continue;                                                                                  \
    }
#define NUM_OPT(name, field, lo, hi)                                                               \
    if (cli_match_value(argc, argv, &i, name, &v)) {                                               \
        if (!v || cli_parse_u64(v, lo, hi, &e->field) != 0) {                                      \
            *exit_code = s_usage(name " needs a whole number from " #lo " to " #hi ", not '%s'",   \
                                 v ? v : "");                                                      \
            return -1;                                                                             \
        }                                                                                          \
        continue;                                                                                  \
    }
        STR_OPT("--plugin", plugin)
        STR_OPT("--params", params)
        STR_OPT("--run", run_id)
        STR_OPT("--in", in_path)
        STR_OPT("--out", out_path)
        STR_OPT("--broker", broker)
        STR_OPT("--plugin-dir", plugin_dir)
        STR_OPT("--store", store)
        STR_OPT("--seed-mode", seed_mode_name)
        if (cli_match_value(argc, argv, &i, "--exec", &v)) {
            if (!v || !strchr(v, '=') || v[0] == '=') {
                *exit_code = s_usage("--exec needs NAME=COMMAND, not '%s'", v ? v : "");
                return -1;
            }
            if (e->n_exec == EVAL_MAX_EXEC) {
                *exit_code = s_usage("at most 16 --exec%s", NULL);
                return -1;
            }
            e->exec[e->n_exec++] = v;
            continue;
        }
        STR_OPT("--aggregate", aggregate_name)
        if (strcmp(arg, "--stats") == 0) {
            e->stats = 1;
            continue;
        }
        if (strcmp(arg, "--quiet") == 0) {
            e->quiet = 1;
            continue;
        }
        if (strcmp(arg, "--no-cache") == 0) {
            e->no_cache = 1;
            continue;
        }
        if (strcmp(arg, "--retry-failed") == 0) {
            e->retry_failed = 1;
            continue;
        }
        if (strcmp(arg, "--replay") == 0) {
            e->replay = 1;
            continue;
        }
        if (strcmp(arg, "--local") == 0) {
            e->local = 1;
            continue;
        }
        NUM_OPT("--seed", seed, 0, UINT64_MAX)
        NUM_OPT("--replicates", replicates, 1, 10000)
        NUM_OPT("--slots", slots, 0, 4096)
        NUM_OPT("--timeout", timeout_s, 0, 4294967)
        NUM_OPT("--attempts", attempts, 1, 100)
        NUM_OPT("--weight", weight, 1, 1000)
#undef STR_OPT
#undef NUM_OPT
        int keys = cli_keys_option(argc, argv, &i, "fitfarm eval", exit_code);
        if (keys > 0)
            continue;
        if (keys < 0)
            return -1;
        if (arg[0] == '-')
            *exit_code = s_usage("unknown option %s", arg);
        else
            *exit_code = s_usage("unexpected argument '%s'", arg);
        return -1;
    }
    if (!e->plugin) {
        *exit_code = s_usage("--plugin NAME is required%s", NULL);
        return -1;
    }
    if (e->seed_mode_name && strcmp(e->seed_mode_name, "genome") == 0) {
        e->seed_mode = 0;
    } else if (e->seed_mode_name && strcmp(e->seed_mode_name, "common") == 0) {
        e->seed_mode = 1;
    } else if (e->seed_mode_name) {
        *exit_code = s_usage("--seed-mode is genome or common, not '%s'", e->seed_mode_name);
        return -1;
    }
    if (!e->aggregate_name || strcmp(e->aggregate_name, "none") == 0) {
        e->aggregate = 0;
    } else if (strcmp(e->aggregate_name, "mean") == 0) {
        e->aggregate = 1;
    } else if (strcmp(e->aggregate_name, "median") == 0) {
        e->aggregate = 2;
    } else {
        *exit_code = s_usage("--aggregate is mean, median or none, not '%s'", e->aggregate_name);
        return -1;
    }
    if (e->local && e->broker) {
        *exit_code = s_usage("--local and --broker contradict each other: --local runs the "
                             "embedded pool%s", NULL);
        return -1;
    }
    if (e->n_exec && e->broker) {
        /* A remote pool's workers run only programs their own machines name. */
        *exit_code = s_usage("--exec is for the embedded pool; a broker's workers take --exec "
                             "themselves (fitfarm-worker --exec NAME=CMD)%s", NULL);
        return -1;
    }
    if (e->replay && !e->run_id) {
        *exit_code = s_usage("--replay needs --run ID (the run to replay)%s", NULL);
        return -1;
    }
    if (e->replay && e->retry_failed) {
        *exit_code = s_usage("--replay never simulates; --retry-failed would%s", NULL);
        return -1;
    }
    if (e->replay && e->no_cache) {
        *exit_code = s_usage("--replay and --no-cache contradict each other%s", NULL);
        return -1;
    }
    {
        char name[PROTO_MAX_NAME_BYTES + 1], why[300];
        const char *constraint;
        if (strlen(e->plugin) > PROTO_MAX_NAME_BYTES)
            snprintf(why, sizeof why, "longer than %u bytes", PROTO_MAX_NAME_BYTES);
        if (strlen(e->plugin) > PROTO_MAX_NAME_BYTES ||
            proto_plugin_ref_split(e->plugin, name, sizeof name, &constraint, why,
                                   sizeof why) != 0) {
            fprintf(stderr, "fitfarm eval: --plugin '%.200s': %s (NAME or NAME@VERSION; see "
                    "fitfarm eval --help)\n", e->plugin, why);
            *exit_code = 2;
            return -1;
        }
    }
    if (e->run_id && (!*e->run_id || strlen(e->run_id) > PROTO_MAX_NAME_BYTES)) {
        *exit_code = s_usage("--run '%s' must have 1 to 128 bytes", e->run_id);
        return -1;
    }
    char err[200];
    char *canon = NULL;
    if (proto_params_canonical(e->params, &canon, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm eval: --params: %s (see fitfarm eval --help)\n", err);
        *exit_code = 2;
        return -1;
    }
    free(canon);
    return 0;
}

static int s_reserve_records(eval_t *e)
{
    if (e->n_records < e->cap_records)
        return 0;
    size_t cap = e->cap_records ? e->cap_records * 2 : 1024;
    eval_record_t *r = realloc(e->records, cap * sizeof *r);
    if (!r)
        return -1;
    e->records = r;
    e->cap_records = cap;
    return 0;
}

/* Parses one line into a record (or nothing, for a blank line). */
static int s_take_line(eval_t *e, const char *text, size_t len, size_t line_no, int too_long)
{
    cli_jsonl_row_t row;
    char err[512];
    int prc;
    if (too_long) {
        memset(&row, 0, sizeof row);
        row.id_json = strdup("null");
        snprintf(err, sizeof err, "the line is longer than %u bytes", CLI_JSONL_MAX_LINE);
        prc = row.id_json ? CLI_JSONL_INVALID : CLI_JSONL_NOMEM;
    } else {
        prc = cli_jsonl_parse(text, len, &row, err, sizeof err);
    }
    if (prc == CLI_JSONL_BLANK)
        return 0;
    if (prc == CLI_JSONL_NOMEM || s_reserve_records(e) != 0) {
        cli_jsonl_row_free(&row);
        fprintf(stderr, "fitfarm eval: out of memory at line %zu\n", line_no);
        return -1;
    }
    eval_record_t *rec = &e->records[e->n_records];
    memset(rec, 0, sizeof *rec);
    rec->line = line_no;
    rec->id_json = row.id_json;
    row.id_json = NULL;
    if (prc == CLI_JSONL_INVALID) {
        rec->error = strdup(err);
        if (!rec->error) {
            free(rec->id_json);
            return -1;
        }
        e->n_records++;
        return 0;
    }
    if (!e->building &&
        fitfarm_batch_new(e->plugin, e->params, (unsigned)e->replicates, &e->building) != 0) {
        cli_jsonl_row_free(&row);
        free(rec->id_json);
        fprintf(stderr, "fitfarm eval: cannot create a batch\n");
        return -1;
    }
    long idx = fitfarm_batch_add_f64(e->building, row.genome, row.n);
    cli_jsonl_row_free(&row);
    if (idx < 0) {
        free(rec->id_json);
        fprintf(stderr, "fitfarm eval: cannot add line %zu to a batch: %s\n", line_no,
                fitfarm_strerror((int)idx));
        return -1;
    }
    rec->batch = e->building;
    rec->index = (size_t)idx;
    e->n_records++;
    return 0;
}

/* Replay met a request the recorded run never saw: name its input line. */
static int s_not_recorded(eval_t *e, const fitfarm_batch_t *b)
{
    const char *msg = fitfarm_client_error(e->client);
    fitfarm_refusal_t why = FITFARM_REFUSAL_INIT;
    size_t line = 0;
    if (fitfarm_refusal(e->run, &why) == 0 && why.has_request && why.batch == b) {
        size_t index = why.index;
        for (size_t i = e->cursor; i < e->n_records; i++)
            if (e->records[i].batch == b && e->records[i].index == index) {
                line = e->records[i].line;
                break;
            }
    }
    if (line) {
        /* The lines before it were recorded: the library asks for them
         * again on its own; print them first (s_finish_replay). */
        e->replay_stop_line = line;
        return EVAL_REPLAY_STOPPED;
    }
    fprintf(stderr, "fitfarm eval: %s\n", msg);
    return 1;
}

/* Replay met an unseen line: prints every recorded line before it as its
 * results come in, then says where it stopped. Returns the exit status. */
static void s_flush_prefix(eval_t *e);
static int s_finish_replay(eval_t *e)
{
    for (;;) {
        s_flush_prefix(e);
        if (e->cursor >= e->n_records || e->records[e->cursor].line >= e->replay_stop_line)
            break;
        fitfarm_result_t res = FITFARM_RESULT_INIT;
        int prc = fitfarm_poll(e->run, &res, 200);
        while (prc == 1)
            prc = fitfarm_poll(e->run, &res, 0);
        if (prc < 0 && prc != FITFARM_ENOTRECORDED) {
            fprintf(stderr, "fitfarm eval: %s\n", fitfarm_client_error(e->client));
            return 1;
        }
        if (s_stop)
            return 130;
    }
    fprintf(stderr, "fitfarm eval: replay of run %s stopped: input line %zu was never seen "
            "by the recorded run (other genome, params, plugin, seed or order); the %zu "
            "results before it are printed; nothing was simulated\n", e->run_id,
            e->replay_stop_line, e->printed_slots);
    return 1;
}

static int s_send_batch(eval_t *e, fitfarm_batch_t *b);

static int s_submit_building(eval_t *e)
{
    if (!e->building)
        return 0;
    if (e->n_batches == e->cap_batches) {
        size_t cap = e->cap_batches ? e->cap_batches * 2 : 16;
        fitfarm_batch_t **b = realloc(e->batches, cap * sizeof *b);
        if (!b)
            return 1;
        e->batches = b;
        size_t *l = realloc(e->batch_last, cap * sizeof *l);
        if (!l)
            return 1;
        e->batch_last = l;
        e->cap_batches = cap;
    }
    fitfarm_batch_t *b = e->building;
    e->building = NULL;
    e->batches[e->n_batches] = b;
    e->batch_last[e->n_batches] = e->n_records - 1;
    e->n_batches++;
    return s_send_batch(e, b);
}

/* Submits b (new, or refused before as "queue full"). Over the queue cap it
 * is kept for a later try, not an error: the queue drains as results come
 * back. Returns 0 or the exit status of a failure (reported). */
static int s_send_batch(eval_t *e, fitfarm_batch_t *b)
{
    int rc = fitfarm_submit(e->run, b, CLI_SUBMIT_WAIT_MS);
    int64_t now = common_clock_ms();
    /* Over the cap with nothing of ours queued: no result will make room,
     * the batch alone is over it (a smaller cap than a batch): say so. */
    if (rc == FITFARM_EQUEUEFULL && e->submitted == e->printed_slots &&
        fitfarm_batch_arrived(b) == 0) {
        fprintf(stderr, "fitfarm eval: %s; nothing of this run is queued, so this batch of %zu "
                "lines alone is over the cap\n",
                fitfarm_client_error(e->client), fitfarm_batch_size(b));
        return 1;
    }
    if (rc == FITFARM_EQUEUEFULL) {
        e->retry = b;
        e->retry_at = now + EVAL_QUEUE_RETRY_MS;
        e->retry_count++;
        if (e->retry_noted_at == 0 || now - e->retry_noted_at >= EVAL_QUEUE_NOTE_MS) {
            fprintf(stderr, "fitfarm eval: waiting for the broker's queue to drain (%s); %" PRIu64
                    " tries so far, input is read again when it takes the batch\n",
                    fitfarm_client_error(e->client), e->retry_count);
            e->retry_noted_at = now;
        }
        return 0;
    }
    if (e->retry == b) {
        e->retry = NULL;
        e->retry_count = 0;
        e->retry_noted_at = 0;
    }
    if (rc == FITFARM_EPLUGIN)
        return cli_pool_say_unknown(e->client, "fitfarm eval", e->plugin,
                                    fitfarm_client_error(e->client));
    if (rc == FITFARM_ENOTRECORDED)
        return s_not_recorded(e, b);
    if (rc != 0) {
        fprintf(stderr, "fitfarm eval: %s\n", fitfarm_client_error(e->client));
        return 1;
    }
    e->submitted += fitfarm_batch_size(b) * e->replicates;
    if (e->wait_hint) {
        char why[1024];
        e->wait_hint = 0;
        if (cli_pool_plugin_blocked(e->client, e->plugin, 5000, why, sizeof why))
            fprintf(stderr, "fitfarm eval: waiting: %s\n", why);
    }
    return 0;
}

/* Prints every record whose turn has come; frees batches fully printed. */
static void s_flush_prefix(eval_t *e)
{
    int wrote = 0;
    while (e->cursor < e->n_records) {
        eval_record_t *rec = &e->records[e->cursor];
        if (!rec->batch) {
            for (; e->cursor_r < e->replicates; e->cursor_r++) {
                eval_print_head(e->out, rec, e->cursor_r, "invalid");
                fputs(", \"error\": ", e->out);
                cli_json_string(e->out, rec->error);
                fputs("}\n", e->out);
            }
            e->any_not_ok = 1;
        } else {
            for (; e->cursor_r < e->replicates; e->cursor_r++) {
                fitfarm_result_t res = FITFARM_RESULT_INIT;
                if (fitfarm_batch_result(rec->batch, rec->index, e->cursor_r, &res) != 0)
                    break;
                e->any_not_ok |= eval_print_result(e->out, rec, &res);
                e->printed_slots++;
                e->printed_cached += res.cached != 0;
                e->printed_failed += res.status != FITFARM_STATUS_OK;
                e->last_result_ms = common_clock_ms();
            }
            if (e->cursor_r < e->replicates)
                break;
            if (e->aggregate)
                eval_print_aggregate(e->out, rec, (unsigned)e->replicates, e->aggregate);
        }
        wrote = 1;
        free(rec->id_json);
        free(rec->error);
        rec->id_json = rec->error = NULL;
        /* A batch whose last record is printed is no longer needed. */
        if (e->n_batches > 0 && e->batch_last[0] == e->cursor) {
            fitfarm_batch_destroy(&e->batches[0]);
            memmove(e->batches, e->batches + 1, (e->n_batches - 1) * sizeof *e->batches);
            memmove(e->batch_last, e->batch_last + 1, (e->n_batches - 1) * sizeof *e->batch_last);
            e->n_batches--;
        }
        e->cursor++;
        e->cursor_r = 0;
    }
    if (wrote)
        fflush(e->out);
    /* Printed records are dead: drop them, so the array holds only the
     * read-ahead window however long the input. */
    if (e->cursor >= 4096 && e->cursor * 2 >= e->n_records) {
        size_t shift = e->cursor;
        memmove(e->records, e->records + shift, (e->n_records - shift) * sizeof *e->records);
        e->n_records -= shift;
        e->cursor = 0;
        for (size_t i = 0; i < e->n_batches; i++)
            e->batch_last[i] -= shift;
        if (e->cap_records > 2 * EVAL_AHEAD_LINES && e->n_records < e->cap_records / 4) {
            eval_record_t *r = realloc(e->records, (e->cap_records / 2) * sizeof *r);
            if (r) {
                e->records = r;
                e->cap_records /= 2;
            }
        }
    }
}

/* 1 while more input may be read: the window of lines not yet printed and
 * of results owed has room, and no batch waits for the queue to drain. */
static int s_room(const eval_t *e)
{
    size_t building = e->building ? fitfarm_batch_size(e->building) * e->replicates : 0;
    return !e->retry && e->n_records - e->cursor < EVAL_AHEAD_LINES &&
           e->submitted + building - e->printed_slots < EVAL_AHEAD_SLOTS;
}

/* The progress line (eval_lines.h), at most every 200 ms, on a terminal
 * only and not with --quiet. */
static void s_progress(eval_t *e, int final)
{
    if (!e->progress_tty || e->quiet)
        return;
    int64_t now = common_clock_ms();
    if (!final && now - e->progress_at < 200)
        return;
    e->progress_at = now;
    if (!e->started_ms)
        e->started_ms = e->last_result_ms = now;
    eval_print_progress(stderr,
                        &(eval_progress_t){.answered = e->printed_slots,
                                           .sent = e->submitted,
                                           .cached = e->printed_cached,
                                           .failed = e->printed_failed,
                                           .seconds = (double)(now - e->started_ms) / 1000.0,
                                           .silent = (double)(now - e->last_result_ms) / 1000.0},
                        final);
}

/* The reading and waiting loop. Returns the exit status. */
static int s_loop(eval_t *e)
{
    char *buf = malloc(EVAL_READ_BYTES);
    char *line = NULL;
    size_t line_len = 0, line_cap = 0, line_no = 0;
    int too_long = 0, eof = 0, rc = 0;
    if (!buf) {
        fprintf(stderr, "fitfarm eval: out of memory\n");
        return 1;
    }
    while (!s_stop) {
        /* 1. Take what input is there, without waiting for more. */
        int readable = 0;
        if (!eof && s_room(e)) {
            struct pollfd pfd = {e->in_fd, POLLIN, 0};
            readable = poll(&pfd, 1, 0) > 0;
        }
        if (readable) {
            ssize_t n = read(e->in_fd, buf, EVAL_READ_BYTES);
            if (n < 0 && (errno == EINTR || errno == EAGAIN))
                continue;
            if (n < 0) {
                fprintf(stderr, "fitfarm eval: reading input: %s\n", strerror(errno));
                rc = 1;
                break;
            }
            if (n == 0)
                eof = 1;
            size_t start = 0;
            for (size_t i = 0; i <= (size_t)n; i++) {
                int end_line = i < (size_t)n ? buf[i] == '\n' : 0;
                int last = i == (size_t)n;
                if (!end_line && !last)
                    continue;
                size_t piece = i - start;
                if (!too_long) {
                    if (line_len + piece > CLI_JSONL_MAX_LINE) {
                        too_long = 1; /* keep reading to its end, but not keeping it */
                    } else if (piece > 0) {
                        if (line_len + piece > line_cap) {
                            size_t cap = line_cap ? line_cap : 4096;
                            while (cap < line_len + piece)
                                cap *= 2;
                            char *l = realloc(line, cap);
                            if (!l) {
                                fprintf(stderr, "fitfarm eval: out of memory\n");
                                rc = 1;
                                goto done;
                            }
                            line = l;
                            line_cap = cap;
                        }
                        memcpy(line + line_len, buf + start, piece);
                        line_len += piece;
                    }
                }
                if (end_line || (last && eof && (line_len > 0 || too_long))) {
                    line_no++;
                    if (s_take_line(e, line, line_len, line_no, too_long) != 0) {
                        rc = 1;
                        goto done;
                    }
                    line_len = 0;
                    too_long = 0;
                }
                start = i + 1;
            }
            if (e->building && fitfarm_batch_size(e->building) >= EVAL_BATCH_LINES) {
                rc = s_submit_building(e);
                if (rc)
                    break;
            }
            s_flush_prefix(e); /* invalid lines are printed as they are read */
            if (!eof)
                continue; /* more may be ready right away */
        }
        /* 2. The input paused or ended, or the window is full: send what
         * it gave (after a batch waiting for the queue, in order). */
        if (e->retry && common_clock_ms() >= e->retry_at)
            rc = s_send_batch(e, e->retry);
        if (!rc && !e->retry)
            rc = s_submit_building(e);
        if (rc)
            break;
        s_flush_prefix(e);
        s_progress(e, 0);
        if (eof && e->cursor == e->n_records)
            break;
        /* 3. Wait a little for results (or for more input). */
        fitfarm_result_t res = FITFARM_RESULT_INIT;
        int prc = fitfarm_poll(e->run, &res, eof ? 200 : 20);
        while (prc == 1)
            prc = fitfarm_poll(e->run, &res, 0);
        if (prc < 0) {
            fprintf(stderr, "fitfarm eval: %s\n", fitfarm_client_error(e->client));
            rc = 1;
            break;
        }
        if (ferror(e->out)) {
            fprintf(stderr, "fitfarm eval: writing results failed\n");
            rc = 1;
            break;
        }
    }
    if (rc == EVAL_REPLAY_STOPPED)
        rc = s_finish_replay(e);
    if (s_stop && rc == 0) {
        fprintf(stderr, "\nfitfarm eval: interrupted; %zu of %zu results written\n",
                e->printed_slots, e->submitted);
        rc = 130;
    }
done:
    s_progress(e, 1);
    free(line);
    free(buf);
    return rc;
}

int cli_cmd_eval(int argc, char **argv)
{
    eval_t e;
    memset(&e, 0, sizeof e);
    e.in_fd = STDIN_FILENO;
    e.out = stdout;
    int rc = 0;
    if (s_parse_args(&e, argc, argv, &rc) != 0)
        return rc;
    if (e.in_path && strcmp(e.in_path, "-") != 0) {
        e.in_fd = open(e.in_path, O_RDONLY | O_CLOEXEC);
        if (e.in_fd < 0) {
            fprintf(stderr, "fitfarm eval: cannot read %s: %s (see fitfarm eval --help)\n",
                    e.in_path, strerror(errno));
            return 2;
        }
    }
    /* open() takes a folder for reading, and read() then fails with EISDIR
     * after the pool has started: refuse it here, like a missing file. */
    {
        struct stat st;
        if (fstat(e.in_fd, &st) == 0 && S_ISDIR(st.st_mode)) {
            fprintf(stderr, "fitfarm eval: cannot read %s: it is a folder, not a file of JSON "
                    "Lines (see fitfarm eval --help)\n",
                    e.in_fd == STDIN_FILENO ? "standard input" : e.in_path);
            if (e.in_fd != STDIN_FILENO)
                close(e.in_fd);
            return 2;
        }
    }
    if (e.out_path && strcmp(e.out_path, "-") != 0) {
        e.out = fopen(e.out_path, "we");
        if (!e.out) {
            fprintf(stderr, "fitfarm eval: cannot write %s: %s (see fitfarm eval --help)\n",
                    e.out_path, strerror(errno));
            if (e.in_fd != STDIN_FILENO)
                close(e.in_fd);
            return 2;
        }
    }
    e.progress_tty = isatty(STDERR_FILENO);
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = s_on_signal;
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    signal(SIGPIPE, SIG_IGN);

    fitfarm_options_t opts = FITFARM_OPTIONS_INIT;
    opts.broker = e.broker;
    opts.slots = (unsigned)e.slots;
    opts.plugin_dir = e.plugin_dir;
    opts.store_dir = e.store;
    opts.exec_plugins = e.n_exec ? e.exec : NULL;
    if (cli_keys_apply(&opts, "fitfarm eval") != 0) {
        rc = 2;
        goto cleanup;
    }
    if (e.local) {
        opts.broker = NULL; /* whatever the environment or config said */
    } else if (!e.broker && opts.broker) {
        /* The broker came from FITFARM_BROKER or the config file: options
         * that only mean something for the embedded pool would be ignored
         * in silence. Say so, naming both. */
        const char *embedded_only = e.slots ? "--slots" : e.store ? "--store"
                                    : e.plugin_dir ? "--plugin-dir" : e.n_exec ? "--exec" : NULL;
        if (embedded_only) {
            const char *from = getenv("FITFARM_BROKER") && *getenv("FITFARM_BROKER")
                                   ? "FITFARM_BROKER" : "'broker =' in the config file";
            fprintf(stderr, "fitfarm eval: %s is for the embedded pool, but %s sends this run "
                    "to the broker at %s; drop %s, or add --local to use the embedded pool\n",
                    embedded_only, from, opts.broker, embedded_only);
            rc = 2;
            goto cleanup;
        }
    }
    char err[1200];
    if (fitfarm_client_new(&opts, &e.client, err, sizeof err) != 0) {
        fprintf(stderr, "fitfarm eval: %s\n", err);
        rc = 1;
        goto cleanup;
    }
    /* Say "no such plugin" before reading any input, when the pool is known. */
    {
        char list[4096], why[1024];
        int has, n_workers;
        cli_pool_plugins(e.client, list, sizeof list, &has, e.plugin, &n_workers);
        /* Even when a connected worker matches --plugin, the broker may
         * resolve it to a higher known version that nobody connected
         * carries: its warning is read once the first batch is in. */
        e.wait_hint = 1;
        if (n_workers > 0 && !has &&
            cli_pool_plugin_blocked(e.client, e.plugin, 5000, why, sizeof why)) {
            /* Offered, but not with the build or version the jobs need: they
             * wait for a worker that has it. Say so rather than "no such
             * plugin" or silence. */
            fprintf(stderr, "fitfarm eval: waiting: %s\n", why);
            e.wait_hint = 0;
        } else if (n_workers > 0 && !has) {
            char name[PROTO_MAX_NAME_BYTES + 1], versions[1024];
            const char *constraint = NULL;
            (void)proto_plugin_ref_split(e.plugin, name, sizeof name, &constraint, NULL, 0);
            cli_pool_versions(e.client, name, versions, sizeof versions);
            if (!versions[0]) {
                fprintf(stderr, "fitfarm eval: the pool has no plugin \"%s\"; it has: %s\n",
                        name, list[0] ? list : "(none)");
                rc = 2;
                goto cleanup;
            }
            /* Workers carry the name at other versions only. Which version
             * --plugin means is the broker's to say (its store knows every
             * version seen): it refuses a constraint that matches none, or
             * takes the batch, whose jobs then wait for a worker with it. */
        }
    }
    fitfarm_run_options_t ropts = FITFARM_RUN_OPTIONS_INIT;
    ropts.run_id = e.run_id;
    ropts.seed = e.seed;
    ropts.seed_mode = e.seed_mode;
    ropts.no_cache = e.no_cache;
    ropts.replay = e.replay;
    ropts.retry_failed = e.retry_failed;
    ropts.timeout_s = (unsigned)e.timeout_s;
    ropts.attempts = (unsigned)e.attempts;
    ropts.weight = (unsigned)e.weight;
    if (fitfarm_run_open(e.client, &ropts, &e.run) != 0) {
        fprintf(stderr, "fitfarm eval: %s\n", fitfarm_client_error(e.client));
        rc = 1;
        goto cleanup;
    }
    if (!e.run_id) {
        /* A killed client can only be resumed by a run id it never chose. */
        const char *id = fitfarm_run_id(e.run);
        char seed[40] = "";
        if (e.seed)
            snprintf(seed, sizeof seed, " --seed %llu", (unsigned long long)e.seed);
        fprintf(stderr, "fitfarm: run %s (resume with --run %s%s%s)\n", id, id, seed,
                e.broker || e.store ? "" : " and a --store DIR: this pool's store is temporary");
    }
    rc = s_loop(&e);
    if (rc == 0 && e.any_not_ok)
        rc = 1;
    if (e.stats) {
        fitfarm_run_stats_t st = FITFARM_RUN_STATS_INIT;
        fitfarm_run_stats(e.run, &st);
        uint64_t dups = st.duplicates, resent = st.resent;
        fprintf(stderr, "fitfarm eval: stats: results %zu, duplicates dropped %llu, "
                "re-sent requests %llu\n", e.printed_slots, (unsigned long long)dups,
                (unsigned long long)resent);
    }
cleanup:
    if (e.out && e.out != stdout)
        fclose(e.out);
    else
        fflush(stdout);
    if (e.in_fd != STDIN_FILENO && e.in_fd >= 0)
        close(e.in_fd);
    for (size_t i = e.cursor; i < e.n_records; i++) {
        free(e.records[i].id_json);
        free(e.records[i].error);
    }
    free(e.records);
    for (size_t i = 0; i < e.n_batches; i++)
        fitfarm_batch_destroy(&e.batches[i]);
    free(e.batches);
    free(e.batch_last);
    fitfarm_batch_destroy(&e.building);
    fitfarm_run_destroy(&e.run);
    fitfarm_client_destroy(&e.client);
    return rc;
}
