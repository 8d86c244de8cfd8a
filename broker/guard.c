/* guard.c: admission policy at start, per message and on reload (see
 * guard.h). Owns no state beyond b->zap and the last-refusal note used to
 * keep a removed peer's heartbeats from flooding the log. */
#include "guard.h"

#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <string.h>

#include "access.h"
#include "common/clock.h"
#include "common/endpoint.h"
#include "common/log.h"
#include "dispatch.h"
#include "envelope.h"
#include "zap.h"

#define S_QUIET_MS 10000

static char s_last_fp[COMMON_KEY_FINGERPRINT];
static int64_t s_last_ms;
static uint64_t s_quiet;

static uint32_t s_cap(uint32_t want, uint32_t ceiling)
{
    return want == 0 || want > ceiling ? ceiling : want;
}

int broker_guard_start(broker_t *b, const broker_config_t *config)
{
    proto_limits_t lim = proto_limits_default();
    lim.message_bytes = s_cap(config->max_message_bytes, PROTO_MAX_MESSAGE_BYTES);
    lim.genome_bytes = s_cap(config->max_genome_bytes, PROTO_MAX_GENOME_BYTES);
    lim.batch_items = s_cap(config->max_batch, PROTO_MAX_BATCH_ITEMS);
    lim.objectives = s_cap(config->max_objectives, PROTO_MAX_OBJECTIVES);
    lim.name_bytes = s_cap(config->max_string_bytes, PROTO_MAX_NAME_BYTES);
    b->limits = lim;
    if (config->max_queued_per_run)
        b->max_queued_per_run = config->max_queued_per_run;
    if (config->max_queued_per_client)
        b->max_queued_per_client = config->max_queued_per_client;
    if (config->max_queued_bytes)
        b->max_queued_bytes = config->max_queued_bytes;
    if (config->max_queued_bytes_per_key)
        b->max_queued_bytes_per_key = config->max_queued_bytes_per_key;
    if (config->max_queued_bytes_per_run)
        b->max_queued_bytes_per_run = config->max_queued_bytes_per_run;
    if (config->max_runs)
        b->max_runs = config->max_runs;
    if (config->max_runs_per_key)
        b->max_runs_per_key = config->max_runs_per_key;

    if (config->insecure) {
        const char *eps[2] = {config->clients_endpoint, config->workers_endpoint};
        for (int i = 0; i < 2; i++) {
            if (!common_endpoint_is_local(eps[i])) {
                LOG_ERROR("refusing to run without encryption on %s: --insecure is allowed "
                          "only on ipc://, inproc:// or loopback tcp:// (127.0.0.1, [::1], "
                          "localhost) endpoints, because anyone on the network could submit "
                          "work, take jobs or read results. Make keys instead: 'fitfarm keygen "
                          "broker --dir KEYS', 'fitfarm allow client CLIENT.public --keys KEYS', "
                          "'fitfarm allow worker WORKER.public --keys KEYS', then run "
                          "fitfarm-broker --key KEYS/broker.secret --keys KEYS",
                          eps[i]);
                return -1;
            }
        }
        /* ipc:// sockets are guarded by their folder's permissions (the
         * embedded pool's is private, 0700); loopback TCP is open to every
         * local user, which deserves a warning. */
        if (strncmp(eps[0], "tcp://", 6) == 0 || strncmp(eps[1], "tcp://", 6) == 0)
            LOG_WARN("plaintext (--insecure) on loopback TCP: any local user can connect");
        else
            LOG_INFO("plaintext on ipc/inproc endpoints: access is guarded by file permissions");
        return 0;
    }
    b->zap = broker_zap_new(b->ctx, config->key_file, config->keys_dir);
    if (!b->zap || broker_access_load_shares(b, config->keys_dir, 0) != 0)
        return -1;
    broker_access_sweep(b); /* runs of keys removed while the broker was down */
    return 0;
}

int broker_guard_socket(broker_t *b, void *router, const char *role)
{
    int64_t maxmsg = b->limits.message_bytes;
    if (zmq_setsockopt(router, ZMQ_MAXMSGSIZE, &maxmsg, sizeof maxmsg) != 0) {
        LOG_ERROR("cannot cap message sizes on the %s endpoint: %s", role, zmq_strerror(errno));
        return -1;
    }
    return b->zap ? broker_zap_secure(b->zap, router, role) : 0;
}

int broker_guard_admit(broker_t *b, int workers, const uint8_t *rid, size_t rid_len,
                       zmq_msg_t *body)
{
    if (!b->zap)
        return 1;
    char fp[COMMON_KEY_FINGERPRINT];
    if (broker_zap_admitted(b->zap, workers, body, fp))
        return 1;
    b->dropped_msgs++;
    char hex[BROKER_RID_HEX];
    broker_rid_hex(rid, rid_len, hex);
    broker_worker_t *w = workers ? broker_registry_get(&b->registry, rid, rid_len) : NULL;
    if (w) {
        char name[PROTO_MAX_NAME_BYTES + 1];
        snprintf(name, sizeof name, "%s", w->name);
        uint32_t n = broker_dispatch_drop_worker(b, w);
        LOG_WARN("worker %s (key %s) dropped: its key is no longer on workers.allow; "
                 "re-queued %u jobs",
                 name, fp, n);
    }
    int64_t now = common_clock_ms();
    if (strcmp(fp, s_last_fp) == 0 && now - s_last_ms < S_QUIET_MS) {
        s_quiet++;
        return 0;
    }
    LOG_WARN("dropped a message from %s %s (key %s): the key is no longer on %s.allow%s",
             workers ? "worker" : "client", hex, fp, workers ? "workers" : "clients",
             s_quiet ? "; more such drops are counted, not logged" : "");
    snprintf(s_last_fp, sizeof s_last_fp, "%s", fp);
    s_last_ms = now;
    s_quiet = 0;
    return 0;
}

void broker_guard_note_worker(broker_t *b, const uint8_t *rid, size_t rid_len, zmq_msg_t *body)
{
    if (!b->zap)
        return;
    broker_worker_t *w = broker_registry_get(&b->registry, rid, rid_len);
    if (!w || w->user_id[0])
        return;
    const char *uid = zmq_msg_gets(body, "User-Id");
    if (uid)
        snprintf(w->user_id, sizeof w->user_id, "%s", uid);
}

void broker_guard_reload(broker_t *b)
{
    if (!b->zap) {
        LOG_INFO("SIGHUP: plaintext mode has no allow-lists to reload");
        return;
    }
    if (broker_zap_reload(b->zap) != 0)
        return;
    (void)broker_access_load_shares(b, NULL, 1);
    broker_access_sweep(b); /* before this turn sends anything */
    broker_worker_t *w = b->registry.seen_head;
    while (w) {
        broker_worker_t *next = w->seen_next;
        if (w->user_id[0] && !broker_zap_key_admitted(b->zap, 1, w->user_id)) {
            char name[PROTO_MAX_NAME_BYTES + 1];
            uint8_t key[COMMON_KEY_BYTES];
            char fp[COMMON_KEY_FINGERPRINT] = "unknown";
            if (common_z85_decode(w->user_id, COMMON_KEY_Z85, key) == 0)
                common_key_fingerprint(key, fp);
            snprintf(name, sizeof name, "%s", w->name);
            uint32_t n = broker_dispatch_drop_worker(b, w);
            LOG_WARN("worker %s (key %s) dropped: its key was removed from workers.allow; "
                     "re-queued %u jobs",
                     name, fp, n);
        }
        w = next;
    }
}

void broker_guard_stop(broker_t *b)
{
    broker_zap_destroy(&b->zap);
    broker_access_fini(b);
}
