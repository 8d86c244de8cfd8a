/* hostile_peer.c: a test helper that connects to a broker as an authenticated
 * worker or client (CURVE keys given) and sends out-of-protocol messages, one
 * per named attack, 100 ms apart, printing "sent NAME" for each. Used by
 * test_hostile.py, which checks the broker's log and that a well-behaved
 * client through the same broker still gets every result right.
 *
 * usage: hostile_peer worker|client ENDPOINT SECRET BROKER_PUBLIC ATTACK...
 * Attacks: garbage truncated mistyped unknown_type wrong_direction huge_count
 * oversized_field hello done_never_held credit_storm submit replayed_submit
 * ack_unknown_run multi_frame oversized_message (closes the connection). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <zmq.h>

#include "common/keyfile.h"
#include "msg.h"

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

static int s_attack(int worker, const char *a)
{
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
