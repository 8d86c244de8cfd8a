/* zap.c: CURVE keys, allow-lists, the ZAP handler and handshake monitor of
 * the broker (see zap.h). Owns the broker's key pair (secure memory), the
 * parsed lists and three inproc sockets. */
#include "zap.h"

#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "common/allowlist.h"
#include "common/clock.h"
#include "common/log.h"
#include "fdreserve.h"
#include "stats.h"

#define S_ZAP_ENDPOINT "inproc://zeromq.zap.01"
#define S_ZAP_MAX_FRAMES 8
#define S_REPEAT_QUIET_MS 10000 /* the same refused peer again: count, do not log */

enum { S_CLIENTS = 0, S_WORKERS = 1 };
static const char *const s_role[2] = {"clients", "workers"};
static const char *const s_role_one[2] = {"client", "worker"};

typedef struct {
    void *pair;       /* receives the monitor events of one ROUTER */
    int64_t last_log_ms;
    uint64_t quiet;   /* failures not logged since the last line */
} s_monitor_t;

struct broker_zap {
    void *ctx;
    void *handler; /* REP on S_ZAP_ENDPOINT */
    common_keypair_t *pair;
    char keys_dir[2048];
    common_allowlist_t *lists[2];
    s_monitor_t monitors[2];
    uint64_t refused;
    char last_refused[COMMON_KEY_FINGERPRINT + 64]; /* fp and address of the last refusal */
    int64_t last_refused_ms;
    uint64_t refused_quiet;
};

/* Loads ROLE.allow into *out. A missing file is an empty list at start (a
 * fresh folder) and sets *missing; the caller decides what that means. */
static int s_load_list(broker_zap_t *self, int role, common_allowlist_t **out, int *missing)
{
    char path[2200], err[768];
    snprintf(path, sizeof path, "%s/%s.allow", self->keys_dir, s_role[role]);
    *missing = access(path, F_OK) != 0 && errno == ENOENT;
    if (common_allowlist_read(path, 1, out, err, sizeof err) != 0) {
        LOG_ERROR("cannot load the %s allow-list: %s", s_role_one[role], err);
        return -1;
    }
    return 0;
}

/* Warnings about lists that load but are likely a mistake: an empty one, and
 * a key on both (one machine's key serving as client and worker means a
 * worker's stolen key can submit work, and the reverse). */
static void s_warn_lists(const broker_zap_t *self)
{
    for (int r = 0; r < 2; r++)
        if (common_allowlist_size(self->lists[r]) == 0)
            LOG_WARN("%s/%s.allow admits no key: no %s can connect (add one with 'fitfarm "
                     "allow %s NAME.public --keys %s', then SIGHUP the broker)",
                     self->keys_dir, s_role[r], s_role_one[r], s_role_one[r], self->keys_dir);
    const common_allowlist_t *c = self->lists[S_CLIENTS];
    for (size_t i = 0; i < common_allowlist_size(c); i++) {
        const common_allow_entry_t *e = common_allowlist_at(c, i);
        const common_allow_entry_t *w = common_allowlist_find(self->lists[S_WORKERS], e->key);
        if (!w)
            continue;
        char fp[COMMON_KEY_FINGERPRINT];
        common_key_fingerprint(e->key, fp);
        LOG_WARN("key %s%s%s%s is on both clients.allow and workers.allow in %s: it can submit "
                 "work and take jobs; give each machine one key per role (fitfarm keygen) and "
                 "remove it from one list",
                 fp, e->label[0] ? " (" : "", e->label, e->label[0] ? ")" : "", self->keys_dir);
    }
}

broker_zap_t *broker_zap_new(void *ctx, const char *key_file, const char *keys_dir)
{
    char err[768];
    broker_zap_t *self = calloc(1, sizeof *self);
    if (!self) {
        LOG_ERROR("out of memory");
        return NULL;
    }
    self->ctx = ctx;
    if (!key_file || !keys_dir) {
        LOG_ERROR("CURVE needs the broker's secret key (--key FILE) and its allow-list folder "
                  "(--keys DIR): make them with 'fitfarm keygen broker --dir DIR', then "
                  "'fitfarm allow client NAME.public --keys DIR' and 'fitfarm allow worker "
                  "NAME.public --keys DIR' for each machine; or, on loopback/ipc only, run "
                  "with --insecure");
        goto fail;
    }
    snprintf(self->keys_dir, sizeof self->keys_dir, "%s", keys_dir);
    if (common_keyfile_read_secret(key_file, &self->pair, err, sizeof err) != 0) {
        LOG_ERROR("%s", err);
        goto fail;
    }
    int missing[2];
    if (s_load_list(self, S_CLIENTS, &self->lists[S_CLIENTS], &missing[0]) != 0 ||
        s_load_list(self, S_WORKERS, &self->lists[S_WORKERS], &missing[1]) != 0)
        goto fail;
    self->handler = zmq_socket(ctx, ZMQ_REP);
    int zero = 0;
    if (!self->handler || zmq_setsockopt(self->handler, ZMQ_LINGER, &zero, sizeof zero) != 0 ||
        zmq_bind(self->handler, S_ZAP_ENDPOINT) != 0) {
        LOG_ERROR("cannot start the ZAP handler: %s", zmq_strerror(errno));
        goto fail;
    }
    char fp[COMMON_KEY_FINGERPRINT];
    common_key_fingerprint(self->pair->public_key, fp);
    LOG_INFO("CURVE on: broker key %s; %zu client keys, %zu worker keys admitted (from %s)", fp,
             common_allowlist_size(self->lists[S_CLIENTS]),
             common_allowlist_size(self->lists[S_WORKERS]), keys_dir);
    s_warn_lists(self);
    return self;
fail:
    broker_zap_destroy(&self);
    return NULL;
}

void broker_zap_destroy(broker_zap_t **self_p)
{
    if (!self_p || !*self_p)
        return;
    broker_zap_t *self = *self_p;
    for (int r = 0; r < 2; r++) {
        if (self->monitors[r].pair)
            zmq_close(self->monitors[r].pair);
        common_allowlist_destroy(&self->lists[r]);
    }
    if (self->handler)
        zmq_close(self->handler);
    common_keypair_destroy(&self->pair);
    free(self);
    *self_p = NULL;
}

int broker_zap_secure(broker_zap_t *self, void *router, const char *role)
{
    int r = strcmp(role, s_role[S_WORKERS]) == 0 ? S_WORKERS : S_CLIENTS;
    int one = 1;
    char ep[64];
    snprintf(ep, sizeof ep, "inproc://fitfarm-broker-monitor-%s", s_role[r]);
    if (zmq_setsockopt(router, ZMQ_CURVE_SERVER, &one, sizeof one) != 0 ||
        zmq_setsockopt(router, ZMQ_CURVE_SECRETKEY, self->pair->secret_key, COMMON_KEY_BYTES) !=
            0 ||
        zmq_setsockopt(router, ZMQ_ZAP_DOMAIN, s_role[r], strlen(s_role[r])) != 0) {
        LOG_ERROR("cannot make the %s endpoint a CURVE server: %s", role, zmq_strerror(errno));
        return -1;
    }
    /* One monitor per socket: accept failures ride along (fdreserve.h). */
    /* Connections opened and closed ride along too, for the metrics page
     * (stats.h). */
    int events = ZMQ_EVENT_HANDSHAKE_FAILED_NO_DETAIL | ZMQ_EVENT_HANDSHAKE_FAILED_PROTOCOL |
                 ZMQ_EVENT_HANDSHAKE_FAILED_AUTH | ZMQ_EVENT_ACCEPT_FAILED |
                 ZMQ_EVENT_ACCEPTED | ZMQ_EVENT_DISCONNECTED;
    int zero = 0;
    if (zmq_socket_monitor(router, ep, events) != 0 ||
        !(self->monitors[r].pair = zmq_socket(self->ctx, ZMQ_PAIR)) ||
        zmq_setsockopt(self->monitors[r].pair, ZMQ_LINGER, &zero, sizeof zero) != 0 ||
        zmq_connect(self->monitors[r].pair, ep) != 0) {
        LOG_ERROR("cannot monitor the %s endpoint: %s", role, zmq_strerror(errno));
        return -1;
    }
    return 0;
}

int broker_zap_pollitems(broker_zap_t *self, zmq_pollitem_t *items, int max)
{
    int n = 0;
    void *socks[3] = {self->handler, self->monitors[0].pair, self->monitors[1].pair};
    for (int i = 0; i < 3 && n < max; i++) {
        if (!socks[i])
            continue;
        memset(&items[n], 0, sizeof items[n]);
        items[n].socket = socks[i];
        items[n].events = ZMQ_POLLIN;
        n++;
    }
    return n;
}

static void s_frame_text(zmq_msg_t *m, char *out, size_t n)
{
    size_t len = zmq_msg_size(m);
    if (len >= n)
        len = n - 1;
    const char *d = zmq_msg_data(m);
    for (size_t i = 0; i < len; i++)
        out[i] = (d[i] >= 0x20 && d[i] < 0x7f) ? d[i] : '?';
    out[len] = '\0';
}

static int s_frame_is(zmq_msg_t *m, const char *text)
{
    size_t n = strlen(text);
    return zmq_msg_size(m) == n && memcmp(zmq_msg_data(m), text, n) == 0;
}

static void s_reply(broker_zap_t *self, zmq_msg_t *request_id, const char *code,
                    const char *text, const char *user_id)
{
    zmq_send(self->handler, "1.0", 3, ZMQ_SNDMORE);
    zmq_send(self->handler, request_id ? zmq_msg_data(request_id) : "",
             request_id ? zmq_msg_size(request_id) : 0, ZMQ_SNDMORE);
    zmq_send(self->handler, code, strlen(code), ZMQ_SNDMORE);
    zmq_send(self->handler, text, strlen(text), ZMQ_SNDMORE);
    zmq_send(self->handler, user_id, strlen(user_id), ZMQ_SNDMORE);
    zmq_send(self->handler, "", 0, 0);
}

static void s_log_refusal(broker_zap_t *self, const char *fp, const char *address,
                          const char *why)
{
    self->refused++;
    char tag[sizeof self->last_refused];
    snprintf(tag, sizeof tag, "%s %s", fp, address);
    int64_t now = common_clock_ms();
    if (strcmp(tag, self->last_refused) == 0 && now - self->last_refused_ms < S_REPEAT_QUIET_MS) {
        self->refused_quiet++; /* a refused peer reconnects: one line per 10 s is enough */
        return;
    }
    if (self->refused_quiet)
        LOG_WARN("(%" PRIu64 " more refusals of key %s not logged)", self->refused_quiet,
                 self->last_refused);
    snprintf(self->last_refused, sizeof self->last_refused, "%s", tag);
    self->last_refused_ms = now;
    self->refused_quiet = 0;
    LOG_WARN("refused a connection from %s with key %s: %s", address, fp, why);
}

/* One ZAP request: [version, request id, domain, address, routing id,
 * mechanism, credentials...]. Always answered, or REP would stall. */
static void s_handle_request(broker_zap_t *self)
{
    zmq_msg_t f[S_ZAP_MAX_FRAMES];
    int n = 0, more = 1;
    while (more) {
        zmq_msg_t tmp;
        zmq_msg_init(&tmp);
        if (zmq_msg_recv(&tmp, self->handler, n == 0 ? ZMQ_DONTWAIT : 0) < 0) {
            zmq_msg_close(&tmp);
            if (n == 0)
                return;
            break;
        }
        more = zmq_msg_more(&tmp);
        if (n < S_ZAP_MAX_FRAMES)
            f[n++] = tmp;
        else
            zmq_msg_close(&tmp);
    }
    char address[64] = "?", domain[32] = "?", fp[COMMON_KEY_FINGERPRINT] = "none";
    if (n < 7 || !s_frame_is(&f[0], "1.0")) {
        s_reply(self, n >= 2 ? &f[1] : NULL, "500", "malformed ZAP request", "");
        LOG_ERROR("malformed ZAP request (%d frames); refused", n);
        goto done;
    }
    s_frame_text(&f[2], domain, sizeof domain);
    s_frame_text(&f[3], address, sizeof address);
    int role = s_frame_is(&f[2], s_role[S_WORKERS])   ? S_WORKERS
               : s_frame_is(&f[2], s_role[S_CLIENTS]) ? S_CLIENTS
                                                      : -1;
    if (!s_frame_is(&f[5], "CURVE") || zmq_msg_size(&f[6]) != COMMON_KEY_BYTES || role < 0) {
        char mech[32];
        s_frame_text(&f[5], mech, sizeof mech);
        s_reply(self, &f[1], "400", "CURVE required", "");
        char why[128];
        snprintf(why, sizeof why, "mechanism %s on domain %s: only CURVE on clients/workers",
                 mech, domain);
        s_log_refusal(self, fp, address, why);
        goto done;
    }
    const uint8_t *key = zmq_msg_data(&f[6]);
    common_key_fingerprint(key, fp);
    const common_allow_entry_t *e = common_allowlist_find(self->lists[role], key);
    if (!e) {
        const common_allow_entry_t *other = common_allowlist_find(self->lists[1 - role], key);
        char why[256];
        if (other)
            snprintf(why, sizeof why, "a %s key%s%s%s on the %s endpoint: a %s key may use only "
                     "the %s endpoint",
                     s_role_one[1 - role], other->label[0] ? " (" : "", other->label,
                     other->label[0] ? ")" : "", s_role[role], s_role_one[1 - role],
                     s_role[1 - role]);
        else
            snprintf(why, sizeof why, "not on the %s allow-list (%.200s/%s.allow)", s_role_one[role],
                     self->keys_dir, s_role[role]);
        s_reply(self, &f[1], "400", "key not admitted", "");
        s_log_refusal(self, fp, address, why);
        goto done;
    }
    char user_id[COMMON_KEY_Z85 + 1];
    common_z85_encode_key(key, user_id);
    s_reply(self, &f[1], "200", "OK", user_id);
    LOG_INFO("admitted %s key %s%s%s%s from %s", s_role_one[role], fp, e->label[0] ? " (" : "",
             e->label, e->label[0] ? ")" : "", address);
done:
    for (int i = 0; i < n; i++)
        zmq_msg_close(&f[i]);
}

static void s_handle_monitor(broker_zap_t *self, int role)
{
    s_monitor_t *m = &self->monitors[role];
    for (;;) {
        zmq_msg_t frame;
        zmq_msg_init(&frame);
        if (zmq_msg_recv(&frame, m->pair, ZMQ_DONTWAIT) < 0) {
            zmq_msg_close(&frame);
            return;
        }
        uint16_t event = 0;
        uint32_t value = 0;
        if (zmq_msg_size(&frame) >= 6) {
            memcpy(&event, zmq_msg_data(&frame), 2);
            memcpy(&value, (char *)zmq_msg_data(&frame) + 2, 4);
        }
        int more = zmq_msg_more(&frame);
        zmq_msg_close(&frame);
        while (more) {
            zmq_msg_init(&frame);
            more = zmq_msg_recv(&frame, m->pair, 0) >= 0 && zmq_msg_more(&frame);
            zmq_msg_close(&frame);
        }
        if (event == ZMQ_EVENT_ACCEPTED || event == ZMQ_EVENT_DISCONNECTED) {
            broker_stats_connection_event(role == S_WORKERS ? BROKER_STATS_WORKERS
                                                            : BROKER_STATS_CLIENTS,
                                          event);
            continue;
        }
        /* Refusals by the allow-lists are logged by the handler, with the key. */
        if (event == ZMQ_EVENT_HANDSHAKE_FAILED_AUTH)
            continue;
        if (event == ZMQ_EVENT_ACCEPT_FAILED) {
            broker_fdreserve_accept_failed(role == S_WORKERS ? BROKER_FDRESERVE_WORKERS
                                                             : BROKER_FDRESERVE_CLIENTS,
                                           (int)value);
            continue;
        }
        int64_t now = common_clock_ms();
        if (now - m->last_log_ms < 1000) {
            m->quiet++;
            continue;
        }
        const char *why = event == ZMQ_EVENT_HANDSHAKE_FAILED_PROTOCOL
                              ? "not a CURVE handshake (a plaintext peer, or one with the wrong "
                                "broker key)"
                              : "the handshake failed (a plaintext peer, a wrong broker key, "
                                "or not ZeroMQ)";
        if (m->quiet)
            LOG_WARN("refused a connection on the %s endpoint: %s (and %" PRIu64
                     " more since the last line)",
                     s_role[role], why, m->quiet);
        else
            LOG_WARN("refused a connection on the %s endpoint: %s", s_role[role], why);
        (void)value;
        m->last_log_ms = now;
        m->quiet = 0;
    }
}

void broker_zap_handle(broker_zap_t *self)
{
    for (int i = 0; i < 256; i++) {
        int events = 0;
        size_t sz = sizeof events;
        if (zmq_getsockopt(self->handler, ZMQ_EVENTS, &events, &sz) != 0 ||
            !(events & ZMQ_POLLIN))
            break;
        s_handle_request(self);
    }
    for (int r = 0; r < 2; r++)
        if (self->monitors[r].pair)
            s_handle_monitor(self, r);
}

int broker_zap_reload(broker_zap_t *self)
{
    common_allowlist_t *fresh[2] = {NULL, NULL};
    int missing[2];
    if (s_load_list(self, S_CLIENTS, &fresh[0], &missing[0]) != 0 ||
        s_load_list(self, S_WORKERS, &fresh[1], &missing[1]) != 0) {
        common_allowlist_destroy(&fresh[0]);
        common_allowlist_destroy(&fresh[1]);
        LOG_ERROR("allow-lists not reloaded: the broker keeps the previous ones");
        return -1;
    }
    for (int r = 0; r < 2; r++) {
        if (missing[r] && common_allowlist_size(self->lists[r]) > 0) {
            /* A deleted file is far more often a slip (a move, a half-done
             * deploy) than a way to lock everybody out: an empty file says that. */
            LOG_WARN("SIGHUP: %s/%s.allow is missing; keeping the %zu %s keys loaded before "
                     "(to admit nobody, leave the file there empty)",
                     self->keys_dir, s_role[r], common_allowlist_size(self->lists[r]),
                     s_role_one[r]);
            common_allowlist_destroy(&fresh[r]);
            continue;
        }
        common_allowlist_destroy(&self->lists[r]);
        self->lists[r] = fresh[r];
    }
    s_warn_lists(self);
    LOG_INFO("allow-lists reloaded: %zu client keys, %zu worker keys",
             common_allowlist_size(self->lists[S_CLIENTS]),
             common_allowlist_size(self->lists[S_WORKERS]));
    return 0;
}

int broker_zap_key_admitted(const broker_zap_t *self, int workers, const char *user_id)
{
    uint8_t key[COMMON_KEY_BYTES];
    if (!user_id || strlen(user_id) != COMMON_KEY_Z85 ||
        common_z85_decode(user_id, COMMON_KEY_Z85, key) != 0)
        return 0;
    return common_allowlist_find(self->lists[workers ? S_WORKERS : S_CLIENTS], key) != NULL;
}

int broker_zap_admitted(const broker_zap_t *self, int workers, zmq_msg_t *body,
                        char fp[COMMON_KEY_FINGERPRINT])
{
    const char *user_id = zmq_msg_gets(body, "User-Id");
    uint8_t key[COMMON_KEY_BYTES];
    if (!user_id || strlen(user_id) != COMMON_KEY_Z85 ||
        common_z85_decode(user_id, COMMON_KEY_Z85, key) != 0) {
        snprintf(fp, COMMON_KEY_FINGERPRINT, "unknown");
        return 0;
    }
    common_key_fingerprint(key, fp);
    return common_allowlist_find(self->lists[workers ? S_WORKERS : S_CLIENTS], key) != NULL;
}

uint64_t broker_zap_refused(const broker_zap_t *self)
{
    return self ? self->refused : 0;
}
