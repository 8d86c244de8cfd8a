/* hostile_peer.c: a test helper that connects to a broker as an authenticated
 * worker or client (CURVE keys given) and sends out-of-protocol messages, one
 * per named attack, 100 ms apart, printing "sent NAME" for each. Used by
 * test_hostile.py, which checks the broker's log and that a well-behaved
 * client through the same broker still gets every result right.
 *
 * usage: hostile_peer worker|client ENDPOINT SECRET BROKER_PUBLIC ATTACK...
 * Attacks: garbage truncated mistyped unknown_type wrong_direction huge_count
 * oversized_field hello done_never_held credit_storm submit replayed_submit
 * ack_unknown_run multi_frame oversized_message (closes the connection).
 *
 * Attacks with arguments (after '='; comma-separated, params last as the
 * rest), for test_run_owner.py, test_revoke.py and test_memory_caps.py:
 *   submit=RUN,SEED,MODE,N,PLUGIN,PARAMS   one SUBMIT of run RUN with N items
 *       (tags 1..N, one-double genomes 0.5, 1.5, ...); N = 0 asks to attach
 *   ack=RUN,FROM,TO      one ACK of tags FROM..TO of run RUN
 *   status               one STATUS_REQ
 *   runs=N,PREFIX,PLUGIN,PARAMS   N SUBMITs, each a new run PREFIX-i of one genome
 *   big=N,BYTES,RUN,PLUGIN,PARAMS N SUBMITs of run RUN, each one genome of
 *       BYTES bytes (distinct contents)
 *   listen=MS[,D]        reads replies for MS ms (or until D distinct result
 *       tags have come), printing one line each:
 *       "got RESULTS run=R n=N at=EPOCH_MS", "got REFUSED code=C text=T", "got ACCEPTED
 *       run=R n=N", "got STATUS runs=R1,R2,", then "listened results=N
 *       refused=N accepted=N distinct=N" (distinct: result tags, counted once). Replies to the runs= and big= floods are read
 *       while sending and counted the same way; a flood waits until every
 *       SUBMIT of it is answered. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <zmq.h>

#include "common/keyfile.h"
#include "msg.h"
#include "params.h"

static void *s_sock;

static void s_nap(void)
{
    struct timespec ts = {0, 100 * 1000 * 1000};
    nanosleep(&ts, NULL);
}

static void s_send_raw(const void *buf, size_t len)
{
    zmq_send(s_sock, buf, len, 0);
}

static void s_send_msg(const proto_msg_t *m, size_t cut)
{
    uint8_t *buf = NULL;
    size_t len = 0;
    if (proto_msg_encode(m, &buf, &len) != PROTO_OK) {
        fprintf(stderr, "hostile_peer: cannot encode\n");
        exit(1);
    }
    s_send_raw(buf, cut && cut < len ? cut : len);
    free(buf);
}

static proto_msg_t s_hello(void)
{
    static proto_plugin_info_t pi = {.name = "sphere", .version = "1.0.0", .objectives = 1,
                                     .flags = PROTO_PLUGIN_DETERMINISTIC};
    proto_msg_t m = {.type = PROTO_HELLO};
    m.u.hello.name = "hostile";
    m.u.hello.host = "nowhere";
    m.u.hello.arch = "x86_64";
    m.u.hello.slots = 1;
    m.u.hello.n_plugins = 1;
    m.u.hello.plugins = &pi;
    return m;
}

static proto_msg_t s_submit(proto_item_t *item, double *g)
{
    g[0] = 3.0;
    item->tag = 1;
    item->replicate = 0;
    item->genome_len = sizeof(double);
    item->genome = (uint8_t *)g;
    proto_msg_t m = {.type = PROTO_SUBMIT};
    m.u.submit.run_id = "hostile-run";
    m.u.submit.plugin = "sphere";
    m.u.submit.params = "{}";
    m.u.submit.batch_tag = 7;
    m.u.submit.n_items = 1;
    m.u.submit.items = item;
    return m;
}

static uint64_t s_got_results, s_got_refused, s_got_accepted, s_distinct;
static uint8_t s_seen[1u << 17]; /* a bit per result tag below 2^20 */

/* Reads and prints every waiting reply (waits up to ms for the first). */
static void s_read_replies(int ms, int quiet)
{
    zmq_pollitem_t it = {.socket = s_sock, .events = ZMQ_POLLIN};
    while (zmq_poll(&it, 1, ms) > 0) {
        zmq_msg_t m;
        zmq_msg_init(&m);
        if (zmq_msg_recv(&m, s_sock, ZMQ_DONTWAIT) < 0) {
            zmq_msg_close(&m);
            break;
        }
        proto_msg_t *msg = NULL;
        proto_err_t err = {0};
        proto_limits_t lim = proto_limits_default();
        if (proto_msg_decode(zmq_msg_data(&m), zmq_msg_size(&m), &lim, &msg, &err) == PROTO_OK) {
            if (msg->type == PROTO_RESULTS) {
                s_got_results += msg->u.results.n_results;
                for (uint32_t i = 0; i < msg->u.results.n_results; i++) {
                    uint64_t t = msg->u.results.results[i].tag;
                    if (t < (1u << 20) && !(s_seen[t >> 3] & (1u << (t & 7)))) {
                        s_seen[t >> 3] |= (uint8_t)(1u << (t & 7));
                        s_distinct++;
                    }
                }
                if (!quiet) {
                    struct timespec now;
                    clock_gettime(CLOCK_REALTIME, &now);
                    printf("got RESULTS run=%s n=%u at=%lld\n", msg->u.results.run_id,
                           msg->u.results.n_results,
                           (long long)now.tv_sec * 1000 + now.tv_nsec / 1000000);
                }
            } else if (msg->type == PROTO_REFUSED) {
                s_got_refused++;
                if (!quiet || s_got_refused == 1)
                    printf("got REFUSED code=%u text=%s\n", msg->u.refused.code,
                           msg->u.refused.text);
            } else if (msg->type == PROTO_ACCEPTED) {
                s_got_accepted++;
                if (!quiet)
                    printf("got ACCEPTED run=%s n=%u\n", msg->u.accepted.run_id,
                           msg->u.accepted.n_accepted);
            } else if (msg->type == PROTO_STATUS) {
                printf("got STATUS runs=");
                for (uint32_t i = 0; i < msg->u.status.n_runs; i++)
                    printf("%s,", msg->u.status.runs[i].run_id);
                printf("\n");
            }
            proto_msg_destroy(&msg);
        }
        zmq_msg_close(&m);
        ms = 0;
    }
    fflush(stdout);
}

/* Reads replies until n SUBMITs have been answered (ACCEPTED or REFUSED),
 * for at most 10 minutes: a flood is over when the broker has judged it all. */
static void s_await_replies(uint64_t n)
{
    struct timespec t0, t;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    while (s_got_accepted + s_got_refused < n) {
        clock_gettime(CLOCK_MONOTONIC, &t);
        if (t.tv_sec - t0.tv_sec >= 600)
            break;
        s_read_replies(1000, 1);
    }
}

/* Splits a copy of arg at commas into at most max fields; the last field
 * keeps the rest (params may hold commas). Returns the field count. */
static int s_fields(char *arg, char **f, int max)
{
    int n = 0;
    while (arg && n < max) {
        f[n++] = arg;
        if (n == max)
            break;
        char *c = strchr(arg, ',');
        if (c)
            *c++ = '\0';
        arg = c;
    }
    return n;
}

static char *s_canonical(const char *params)
{
    char *canon = NULL, err[256];
    if (proto_params_canonical(params, &canon, err, sizeof err) != 0) {
        fprintf(stderr, "hostile_peer: bad params %s: %s\n", params, err);
        exit(2);
    }
    return canon;
}

static void s_send_submit(const char *run, uint64_t seed, uint32_t mode, uint64_t batch_tag,
                          proto_item_t *items, uint32_t n, const char *plugin, const char *params)
{
    proto_msg_t m = {.type = PROTO_SUBMIT};
    m.u.submit.run_id = (char *)run;
    m.u.submit.run_seed = seed;
    m.u.submit.seed_mode = mode;
    m.u.submit.plugin = (char *)plugin;
    m.u.submit.params = (char *)params;
    m.u.submit.batch_tag = batch_tag;
    m.u.submit.n_items = n;
    m.u.submit.items = items;
    s_send_msg(&m, 0);
}

/* An attack with arguments; returns 1 if a was one, -1 on a bad one. */
static int s_attack_args(const char *a)
{
    const char *eq = strchr(a, '=');
    char *f[8];
    char buf[4096];
    if (strcmp(a, "status") == 0) {
        proto_msg_t m = {.type = PROTO_STATUS_REQ};
        s_send_msg(&m, 0);
        return 1;
    }
    if (!eq || strlen(eq + 1) >= sizeof buf)
        return 0;
    snprintf(buf, sizeof buf, "%s", eq + 1);
    size_t nlen = (size_t)(eq - a);
    if (nlen == 6 && strncmp(a, "submit", 6) == 0) {
        if (s_fields(buf, f, 6) != 6)
            return -1;
        uint32_t n = (uint32_t)strtoul(f[3], NULL, 10);
        proto_item_t *items = calloc(n ? n : 1, sizeof *items);
        double *g = calloc(n ? n : 1, sizeof *g);
        for (uint32_t i = 0; i < n; i++) {
            g[i] = 0.5 + i;
            items[i] = (proto_item_t){.tag = i + 1, .genome_len = 8, .genome = (uint8_t *)&g[i]};
        }
        char *canon = s_canonical(f[5]);
        s_send_submit(f[0], strtoull(f[1], NULL, 10), (uint32_t)strtoul(f[2], NULL, 10), 77,
                      items, n, f[4], canon);
        free(canon);
        free(items);
        free(g);
    } else if (nlen == 3 && strncmp(a, "ack", 3) == 0) {
        if (s_fields(buf, f, 3) != 3)
            return -1;
        uint64_t from = strtoull(f[1], NULL, 10), to = strtoull(f[2], NULL, 10);
        if (to < from || to - from >= 100000)
            return -1;
        uint64_t *tags = calloc(to - from + 1, sizeof *tags);
        for (uint64_t t = from; t <= to; t++)
            tags[t - from] = t;
        proto_msg_t m = {.type = PROTO_ACK};
        m.u.ack.run_id = f[0];
        m.u.ack.n_tags = (uint32_t)(to - from + 1);
        m.u.ack.tags = tags;
        s_send_msg(&m, 0);
        free(tags);
    } else if (nlen == 4 && strncmp(a, "runs", 4) == 0) {
        if (s_fields(buf, f, 4) != 4)
            return -1;
        unsigned long n = strtoul(f[0], NULL, 10);
        char *canon = s_canonical(f[3]);
        for (unsigned long i = 0; i < n; i++) {
            char run[160];
            snprintf(run, sizeof run, "%s-%lu", f[1], i);
            double g = (double)i;
            proto_item_t it = {.tag = 1, .genome_len = 8, .genome = (uint8_t *)&g};
            s_send_submit(run, 1, 0, i + 1, &it, 1, f[2], canon);
            if (i % 256 == 255)
                s_read_replies(0, 1);
        }
        free(canon);
        s_await_replies(n);
    } else if (nlen == 3 && strncmp(a, "big", 3) == 0) {
        if (s_fields(buf, f, 5) != 5)
            return -1;
        unsigned long n = strtoul(f[0], NULL, 10);
        size_t bytes = strtoul(f[1], NULL, 10);
        uint8_t *g = calloc(1, bytes ? bytes : 1);
        char *canon = s_canonical(f[4]);
        for (unsigned long i = 0; i < n; i++) {
            memcpy(g, &i, sizeof i < bytes ? sizeof i : bytes); /* distinct keys */
            proto_item_t it = {.tag = i + 1, .genome_len = (uint32_t)bytes, .genome = g};
            s_send_submit(f[2], 1, 0, i + 1, &it, 1, f[3], canon);
            s_read_replies(0, 1);
        }
        free(canon);
        free(g);
        s_await_replies(n);
    } else if (nlen == 6 && strncmp(a, "listen", 6) == 0) {
        int ms = atoi(buf);
        const char *comma = strchr(buf, ',');
        uint64_t target = comma ? strtoull(comma + 1, NULL, 10) : 0;
        struct timespec t0, t;
        clock_gettime(CLOCK_MONOTONIC, &t0);
        for (;;) {
            clock_gettime(CLOCK_MONOTONIC, &t);
            long left = ms - ((t.tv_sec - t0.tv_sec) * 1000 + (t.tv_nsec - t0.tv_nsec) / 1000000);
            if (left <= 0 || (target && s_distinct >= target))
                break;
            s_read_replies((int)left, 0);
        }
        printf("listened results=%llu refused=%llu accepted=%llu distinct=%llu\n",
               (unsigned long long)s_got_results, (unsigned long long)s_got_refused,
               (unsigned long long)s_got_accepted, (unsigned long long)s_distinct);
    } else {
        return 0;
    }
    return 1;
}

static int s_attack(int worker, const char *a)
{
    int with_args = s_attack_args(a);
    if (with_args < 0) {
        fprintf(stderr, "hostile_peer: bad arguments in %s\n", a);
        return -1;
    }
    if (with_args > 0) {
        printf("sent %.40s\n", a);
        fflush(stdout);
        return 0;
    }
    if (strcmp(a, "garbage") == 0) {
        s_send_raw("\xc1\xff garbage, not MessagePack", 26);
    } else if (strcmp(a, "truncated") == 0) {
        proto_msg_t m = s_hello();
        s_send_msg(&m, 12);
    } else if (strcmp(a, "mistyped") == 0) {
        /* [1, CREDIT or ACK, "ten"]: a string where a number belongs */
        const uint8_t credit[] = {0x93, 0x01, PROTO_CREDIT, 0xa3, 't', 'e', 'n'};
        const uint8_t ack[] = {0x94, 0x01, PROTO_ACK, 0x05, 0x90};
        if (worker)
            s_send_raw(credit, sizeof credit);
        else
            s_send_raw(ack, sizeof ack);
    } else if (strcmp(a, "unknown_type") == 0) {
        const uint8_t m[] = {0x92, 0x01, 0x63};
        s_send_raw(m, sizeof m);
    } else if (strcmp(a, "wrong_direction") == 0) {
        proto_msg_t m = {.type = worker ? PROTO_JOBS : PROTO_RESULTS};
        if (!worker)
            m.u.results.run_id = "hostile-run";
        s_send_msg(&m, 0);
    } else if (strcmp(a, "huge_count") == 0) {
        /* DONE / ACK whose array claims 2^32-1 elements in a few bytes */
        const uint8_t done[] = {0x94, 0x01, PROTO_DONE, 0x01, 0xdd, 0xff, 0xff, 0xff, 0xff, 0x00};
        const uint8_t ack[] = {0x93, 0x01, PROTO_ACK, 0xa1, 'r', 0xdd, 0xff, 0xff, 0xff, 0xff};
        if (worker)
            s_send_raw(done, sizeof done);
        else
            s_send_raw(ack, sizeof ack - 0);
    } else if (strcmp(a, "oversized_field") == 0) {
        /* worker: 100 fitness values (cap 64); client: a genome past the cap */
        static double f[100];
        static double big[(2u << 20) / 8];
        if (worker) {
            proto_outcome_t o = {.job_id = 1, .n_fitness = 100, .fitness = f, .error = ""};
            proto_msg_t m = {.type = PROTO_DONE};
            m.u.done.n_outcomes = 1;
            m.u.done.outcomes = &o;
            s_send_msg(&m, 0);
        } else {
            proto_item_t it;
            proto_msg_t m = s_submit(&it, big);
            it.genome_len = sizeof big;
            s_send_msg(&m, 0);
        }
    } else if (strcmp(a, "hello") == 0) {
        proto_msg_t m = s_hello();
        s_send_msg(&m, 0);
    } else if (strcmp(a, "done_never_held") == 0) {
        static double f[1] = {42.0};
        proto_outcome_t o = {.job_id = 987654321, .n_fitness = 1, .fitness = f, .error = ""};
        proto_msg_t m = {.type = PROTO_DONE};
        m.u.done.n_outcomes = 1;
        m.u.done.outcomes = &o;
        s_send_msg(&m, 0);
    } else if (strcmp(a, "credit_storm") == 0) {
        proto_msg_t m = {.type = PROTO_CREDIT};
        m.u.credit.credits = 0xffffffffu;
        for (int i = 0; i < 100; i++)
            s_send_msg(&m, 0);
    } else if (strcmp(a, "submit") == 0 || strcmp(a, "replayed_submit") == 0) {
        proto_item_t it;
        double g[1];
        proto_msg_t m = s_submit(&it, g);
        s_send_msg(&m, 0);
    } else if (strcmp(a, "ack_unknown_run") == 0) {
        uint64_t tags[3] = {1, 2, 3};
        proto_msg_t m = {.type = PROTO_ACK};
        m.u.ack.run_id = "no-such-run";
        m.u.ack.n_tags = 3;
        m.u.ack.tags = tags;
        s_send_msg(&m, 0);
    } else if (strcmp(a, "multi_frame") == 0) {
        zmq_send(s_sock, "a", 1, ZMQ_SNDMORE);
        zmq_send(s_sock, "b", 1, 0);
    } else if (strcmp(a, "oversized_message") == 0) {
        size_t n = 4u << 20; /* past the broker's --max-message-bytes in the test */
        char *buf = calloc(1, n);
        s_send_raw(buf, n);
        free(buf);
    } else {
        fprintf(stderr, "hostile_peer: unknown attack %s\n", a);
        return -1;
    }
    printf("sent %s\n", a);
    fflush(stdout);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc < 6) {
        fprintf(stderr, "usage: hostile_peer worker|client ENDPOINT SECRET BROKER_PUBLIC ATTACK...\n");
        return 2;
    }
    int worker = strcmp(argv[1], "worker") == 0;
    char err[1024];
    uint8_t server[COMMON_KEY_BYTES];
    common_keypair_t *pair = NULL;
    if (common_keyfile_read_public(argv[4], server, err, sizeof err) != 0 ||
        common_keyfile_read_secret(argv[3], &pair, err, sizeof err) != 0) {
        fprintf(stderr, "hostile_peer: %s\n", err);
        return 1;
    }
    void *ctx = zmq_ctx_new();
    s_sock = zmq_socket(ctx, ZMQ_DEALER);
    int linger = 1000;
    zmq_setsockopt(s_sock, ZMQ_LINGER, &linger, sizeof linger);
    zmq_setsockopt(s_sock, ZMQ_CURVE_SERVERKEY, server, 32);
    zmq_setsockopt(s_sock, ZMQ_CURVE_PUBLICKEY, pair->public_key, 32);
    zmq_setsockopt(s_sock, ZMQ_CURVE_SECRETKEY, pair->secret_key, 32);
    common_keypair_destroy(&pair);
    zmq_connect(s_sock, argv[2]);
    int rc = 0;
    for (int i = 5; i < argc && rc == 0; i++) {
        rc = s_attack(worker, argv[i]);
        s_nap();
    }
    zmq_close(s_sock);
    zmq_ctx_term(ctx);
    return rc == 0 ? 0 : 1;
}
