/* bench_wire: the baseline fitfarm's overhead is measured against: a bare
 * ZeroMQ pipeline with fitfarm's topology and nothing else (no store, no
 * keys, no hashing, no child process, no retries).
 *
 *     client DEALER -> ROUTER broker ROUTER <- worker DEALER (x N)
 *
 * Broker and workers are forked before any ZeroMQ context exists and ended
 * by PID. Each worker announces CREDITS credits; the broker forwards one
 * message per credit and a result message gives the credit back. A job is
 * msgpack [id, [8 x float64]], its result [id, [f]] with f the sphere
 * function (sum of squares, De Jong 1975), so the bytes on the wire are
 * close to fitfarm's for the same genomes. In batched mode a message carries
 * BATCH jobs and BATCH results. The client checks that every id comes back
 * exactly once and that the sum of the results matches a local computation
 * (outside the timed region), so a broken pipeline cannot report a figure.
 *
 * Usage (prints 'name: value unit' lines):
 *     bench_wire thr NWORKERS CREDITS BATCH NJOBS
 *     bench_wire rtt NSAMPLES
 * rtt: one job at a time with one worker: the median round trip in us. */
#include <errno.h>
#include <msgpack.h>
#include <signal.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/prctl.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>
#include <zmq.h>

#define DIM 8
#define MAX_WORKERS 16
#define MAX_BATCH 4096

static double s_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static void s_die(const char *what)
{
    fprintf(stderr, "bench_wire: %s: %s\n", what, zmq_strerror(errno));
    _exit(1);
}

static void *s_socket(void *ctx, int type)
{
    void *s = zmq_socket(ctx, type);
    if (!s)
        s_die("zmq_socket");
    int zero = 0;
    zmq_setsockopt(s, ZMQ_SNDHWM, &zero, sizeof zero); /* a ROUTER must not drop */
    zmq_setsockopt(s, ZMQ_RCVHWM, &zero, sizeof zero);
    zmq_setsockopt(s, ZMQ_LINGER, &zero, sizeof zero);
    return s;
}

static void s_genome(uint64_t id, double g[DIM])
{
    for (int d = 0; d < DIM; d++)
        g[d] = (double)id * 1e-3 + d;
}

static double s_sphere(const double g[DIM])
{
    double f = 0;
    for (int d = 0; d < DIM; d++)
        f += g[d] * g[d];
    return f;
}

/* Appends [id, [values...]] to pk. */
static void s_pack_item(msgpack_packer *pk, uint64_t id, const double *v, int n)
{
    msgpack_pack_array(pk, 2);
    msgpack_pack_uint64(pk, id);
    msgpack_pack_array(pk, (size_t)n);
    for (int i = 0; i < n; i++)
        msgpack_pack_double(pk, v[i]);
}

/* The broker: front ROUTER for the client, back ROUTER for workers. A
 * credit is a worker identity in a ring; jobs are forwarded only while a
 * credit is held, so the broker never queues more than the workers asked for
 * (the client's unread messages wait in its socket). */
static void s_broker(int report_fd)
{
    void *ctx = zmq_ctx_new();
    void *front = s_socket(ctx, ZMQ_ROUTER), *back = s_socket(ctx, ZMQ_ROUTER);
    if (zmq_bind(front, "tcp://127.0.0.1:*") != 0 || zmq_bind(back, "tcp://127.0.0.1:*") != 0)
        s_die("bind");
    char eps[2][128];
    size_t len = sizeof eps[0];
    zmq_getsockopt(front, ZMQ_LAST_ENDPOINT, eps[0], &len);
    len = sizeof eps[1];
    zmq_getsockopt(back, ZMQ_LAST_ENDPOINT, eps[1], &len);
    dprintf(report_fd, "%s %s\n", eps[0], eps[1]);
    close(report_fd);
    enum { RING = 1 << 16 };
    static char ring_id[RING][16];
    static size_t ring_len[RING];
    unsigned head = 0, count = 0;
    char client_id[16];
    size_t client_len = 0;
    for (;;) {
        zmq_pollitem_t items[2] = {{back, 0, ZMQ_POLLIN, 0}, {front, 0, ZMQ_POLLIN, 0}};
        if (zmq_poll(items, count > 0 ? 2 : 1, -1) < 0)
            s_die("poll");
        if (items[0].revents & ZMQ_POLLIN) {
            /* [worker id]["C" credit | result payload] */
            char wid[16];
            int wl = zmq_recv(back, wid, sizeof wid, 0);
            zmq_msg_t m;
            zmq_msg_init(&m);
            if (wl < 0 || zmq_msg_recv(&m, back, 0) < 0)
                s_die("recv worker");
            if (zmq_msg_size(&m) == 1 && *(char *)zmq_msg_data(&m) == 'C') {
                zmq_msg_close(&m);
            } else {
                zmq_send(front, client_id, client_len, ZMQ_SNDMORE);
                zmq_msg_send(&m, front, 0);
            }
            unsigned slot = (head + count++) % RING;
            memcpy(ring_id[slot], wid, (size_t)wl);
            ring_len[slot] = (size_t)wl;
        }
        if (count > 0 && (items[1].revents & ZMQ_POLLIN)) {
            int cl = zmq_recv(front, client_id, sizeof client_id, 0);
            zmq_msg_t m;
            zmq_msg_init(&m);
            if (cl < 0 || zmq_msg_recv(&m, front, 0) < 0)
                s_die("recv client");
            client_len = (size_t)cl;
            zmq_send(back, ring_id[head], ring_len[head], ZMQ_SNDMORE);
            zmq_msg_send(&m, back, 0);
            head = (head + 1) % RING;
            count--;
        }
    }
}

/* A worker: CREDITS credits, then for each message decode its jobs,
 * evaluate, and answer with one message of results. */
static void s_worker(const char *back_ep, int credits)
{
    void *ctx = zmq_ctx_new();
    void *s = s_socket(ctx, ZMQ_DEALER);
    if (zmq_connect(s, back_ep) != 0)
        s_die("connect");
    for (int i = 0; i < credits; i++)
        zmq_send(s, "C", 1, 0);
    msgpack_sbuffer sb;
    msgpack_sbuffer_init(&sb);
    msgpack_unpacked u;
    msgpack_unpacked_init(&u);
    for (;;) {
        zmq_msg_t m;
        zmq_msg_init(&m);
        if (zmq_msg_recv(&m, s, 0) < 0)
            s_die("worker recv");
        if (msgpack_unpack_next(&u, zmq_msg_data(&m), zmq_msg_size(&m), NULL) !=
                MSGPACK_UNPACK_SUCCESS ||
            u.data.type != MSGPACK_OBJECT_ARRAY)
            s_die("worker decode");
        msgpack_sbuffer_clear(&sb);
        msgpack_packer pk;
        msgpack_packer_init(&pk, &sb, msgpack_sbuffer_write);
        msgpack_object_array jobs = u.data.via.array;
        msgpack_pack_array(&pk, jobs.size);
        for (uint32_t j = 0; j < jobs.size; j++) {
            msgpack_object_array job = jobs.ptr[j].via.array;
            double g[DIM];
            for (int d = 0; d < DIM; d++)
                g[d] = job.ptr[1].via.array.ptr[d].via.f64;
            double f = s_sphere(g);
            s_pack_item(&pk, job.ptr[0].via.u64, &f, 1);
        }
        zmq_msg_close(&m);
        zmq_send(s, sb.data, sb.size, 0);
    }
}

typedef struct {
    pid_t pids[MAX_WORKERS + 1];
    int n;
    void *ctx, *sock;
} wire_t;

static void s_start(wire_t *w, int workers, int credits)
{
    /* The broker binds kernel-chosen TCP loopback ports (as fitfarm is
     * measured) and reports both endpoints through a pipe. */
    int fds[2];
    if (pipe(fds) != 0)
        s_die("pipe");
    w->n = 0;
    pid_t b = fork();
    if (b == 0) {
        prctl(PR_SET_PDEATHSIG, SIGKILL);
        close(fds[0]);
        s_broker(fds[1]);
    }
    close(fds[1]);
    w->pids[w->n++] = b;
    char eps[2][128];
    FILE *f = fdopen(fds[0], "r");
    if (!f || fscanf(f, "%127s %127s", eps[0], eps[1]) != 2)
        s_die("broker endpoints");
    fclose(f);
    for (int i = 0; i < workers; i++) {
        pid_t p = fork();
        if (p == 0) {
            prctl(PR_SET_PDEATHSIG, SIGKILL);
            s_worker(eps[1], credits);
        }
        w->pids[w->n++] = p;
    }
    w->ctx = zmq_ctx_new();
    w->sock = s_socket(w->ctx, ZMQ_DEALER);
    if (zmq_connect(w->sock, eps[0]) != 0)
        s_die("client connect");
    usleep(200000); /* workers' credits reach the broker */
}

static void s_stop(wire_t *w)
{
    zmq_close(w->sock);
    zmq_ctx_term(w->ctx);
    for (int i = 0; i < w->n; i++) {
        kill(w->pids[i], SIGKILL);
        waitpid(w->pids[i], NULL, 0);
    }
}

/* Sends njobs jobs in messages of batch jobs, at most `window` messages in
 * flight, and reads every result. Returns jobs per second; exits on a lost,
 * duplicated or wrong result. */
static double s_throughput(wire_t *w, long njobs, int batch, long window, uint64_t base)
{
    unsigned char *seen = calloc((size_t)njobs, 1);
    msgpack_sbuffer sb;
    msgpack_sbuffer_init(&sb);
    msgpack_unpacked u;
    msgpack_unpacked_init(&u);
    double sum = 0;
    long sent = 0, got = 0, inflight = 0;
    double t0 = s_now();
    while (got < njobs) {
        while (sent < njobs && inflight < window) {
            int n = (int)(njobs - sent < batch ? njobs - sent : batch);
            msgpack_sbuffer_clear(&sb);
            msgpack_packer pk;
            msgpack_packer_init(&pk, &sb, msgpack_sbuffer_write);
            msgpack_pack_array(&pk, (size_t)n);
            for (int j = 0; j < n; j++) {
                double g[DIM];
                s_genome(base + (uint64_t)sent + (uint64_t)j, g);
                s_pack_item(&pk, (uint64_t)sent + (uint64_t)j, g, DIM);
            }
            zmq_send(w->sock, sb.data, sb.size, 0);
            sent += n;
            inflight++;
        }
        zmq_msg_t m;
        zmq_msg_init(&m);
        if (zmq_msg_recv(&m, w->sock, 0) < 0)
            s_die("client recv");
        if (msgpack_unpack_next(&u, zmq_msg_data(&m), zmq_msg_size(&m), NULL) !=
            MSGPACK_UNPACK_SUCCESS)
            s_die("client decode");
        msgpack_object_array rs = u.data.via.array;
        for (uint32_t j = 0; j < rs.size; j++) {
            uint64_t id = rs.ptr[j].via.array.ptr[0].via.u64;
            if (id >= (uint64_t)njobs || seen[id]++) {
                fprintf(stderr, "bench_wire: result %llu lost or twice\n", (unsigned long long)id);
                exit(1);
            }
            sum += rs.ptr[j].via.array.ptr[1].via.array.ptr[0].via.f64;
            got++;
        }
        zmq_msg_close(&m);
        inflight--;
    }
    double rate = (double)njobs / (s_now() - t0);
    double expect = 0;
    for (long i = 0; i < njobs; i++) {
        double g[DIM];
        s_genome(base + (uint64_t)i, g);
        expect += s_sphere(g);
    }
    if (expect != sum) { /* same order of additions per id is not kept: compare loosely */
        double rel = (expect - sum) / expect;
        if (rel > 1e-9 || rel < -1e-9) {
            fprintf(stderr, "bench_wire: wrong results (sum %.17g, expected %.17g)\n", sum, expect);
            exit(1);
        }
    }
    free(seen);
    msgpack_sbuffer_destroy(&sb);
    msgpack_unpacked_destroy(&u);
    return rate;
}

static int s_cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(int argc, char **argv)
{
    if (argc == 6 && strcmp(argv[1], "thr") == 0) {
        int workers = atoi(argv[2]), credits = atoi(argv[3]), batch = atoi(argv[4]);
        long njobs = atol(argv[5]);
        if (workers < 1 || workers > MAX_WORKERS || credits < 1 || batch < 1 ||
            batch > MAX_BATCH || njobs < 1) {
            fprintf(stderr, "bench_wire: bad arguments\n");
            return 2;
        }
        wire_t w;
        s_start(&w, workers, credits);
        /* The client keeps every credit in use plus as many again queued. */
        long window = 2L * workers * credits;
        s_throughput(&w, njobs / 10 + 1, batch, window, 1u << 30); /* warm-up */
        double rate = s_throughput(&w, njobs, batch, window, 0);
        printf("wire_%dworkers_batch%d: %.0f jobs/s\n", workers, batch, rate);
        s_stop(&w);
        return 0;
    }
    if (argc == 3 && strcmp(argv[1], "rtt") == 0) {
        int n = atoi(argv[2]);
        if (n < 1) {
            fprintf(stderr, "bench_wire: bad arguments\n");
            return 2;
        }
        wire_t w;
        s_start(&w, 1, 1);
        double *t = calloc((size_t)n, sizeof *t);
        for (int i = 0; i < n; i++) {
            double t0 = s_now();
            s_throughput(&w, 1, 1, 1, (uint64_t)i);
            t[i] = (s_now() - t0) * 1e6;
        }
        qsort(t, (size_t)n, sizeof *t, s_cmp);
        printf("wire_rtt_median: %.0f us\n", t[n / 2]);
        free(t);
        s_stop(&w);
        return 0;
    }
    fprintf(stderr, "usage: bench_wire thr NWORKERS CREDITS BATCH NJOBS | rtt NSAMPLES\n");
    return 2;
}
