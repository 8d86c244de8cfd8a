/* access.c: run ownership, sharing and revocation (see access.h). Owns the
 * parsed share list (b->shares) and its path; reads run owners and
 * connections, parks and unparks runs through runs.h. */
#include "access.h"

#include <assert.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/log.h"
#include "common/sharelist.h"
#include "envelope.h"
#include "zap.h"

#define S_LOG_RUNS 20 /* per sweep, one line per run up to this many; then the sum */

static_assert(COMMON_SHARE_RUN_MAX == PROTO_MAX_NAME_BYTES,
              "a share list line must hold every run id the protocol allows");

/* 1 and key filled when who is a Z85 public key. */
static int s_key(const char *who, uint8_t key[COMMON_KEY_BYTES])
{
    return who && strlen(who) == COMMON_KEY_Z85 && common_z85_decode(who, COMMON_KEY_Z85, key) == 0;
}

const char *broker_access_who(const broker_t *b, const char *user_id)
{
    if (!b->zap)
        return BROKER_ACCESS_LOCAL;
    uint8_t key[COMMON_KEY_BYTES];
    return s_key(user_id, key) ? user_id : NULL;
}

broker_access_t broker_access_may_use(const broker_t *b, const broker_run_t *run, const char *who)
{
    if (!who || !*who)
        return BROKER_ACCESS_NO;
    if (!run->owner[0])
        return BROKER_ACCESS_CLAIM;
    uint8_t key[COMMON_KEY_BYTES];
    /* The owner's key removed from clients.allow revokes the run for every
     * key: a shared key must not keep a revoked owner's run going. */
    if (b->zap && s_key(run->owner, key) && !broker_zap_key_admitted(b->zap, 0, run->owner))
        return BROKER_ACCESS_NO;
    if (strcmp(run->owner, who) == 0)
        return BROKER_ACCESS_OWNER;
    if (s_key(who, key) && common_sharelist_has(b->shares, run->id, key))
        return BROKER_ACCESS_SHARED;
    return BROKER_ACCESS_NO;
}

const char *broker_access_name(const char *who, char out[COMMON_KEY_FINGERPRINT + 8])
{
    uint8_t key[COMMON_KEY_BYTES];
    if (s_key(who, key)) {
        char fp[COMMON_KEY_FINGERPRINT];
        common_key_fingerprint(key, fp);
        snprintf(out, COMMON_KEY_FINGERPRINT + 8, "key %s", fp);
    } else {
        snprintf(out, COMMON_KEY_FINGERPRINT + 8, "%.20s", who && *who ? who : "nobody");
    }
    return out;
}

int broker_access_load_shares(broker_t *b, const char *keys_dir, int reload)
{
    if (!b->shares_path) {
        if (!keys_dir)
            return 0;
        size_t n = strlen(keys_dir) + sizeof "/runs.share";
        b->shares_path = common_xmalloc(n);
        snprintf(b->shares_path, n, "%s/runs.share", keys_dir);
    }
    common_sharelist_t *fresh = NULL;
    char err[768];
    if (common_sharelist_read(b->shares_path, &fresh, err, sizeof err) != 0) {
        LOG_ERROR("cannot load the run share list: %s; %s", err,
                  reload ? "the broker keeps the previous one" : "fix it or remove it");
        return reload ? 0 : -1;
    }
    common_sharelist_destroy(&b->shares);
    b->shares = fresh;
    if (common_sharelist_size(b->shares) || reload)
        LOG_INFO("run share list %s: %zu shares", b->shares_path,
                 common_sharelist_size(b->shares));
    return 0;
}

void broker_access_fini(broker_t *b)
{
    common_sharelist_destroy(&b->shares);
    free(b->shares_path);
    b->shares_path = NULL;
}

void broker_access_sweep(broker_t *b)
{
    if (!b->zap)
        return;
    uint64_t cut = 0, withheld = 0, parked_runs = 0, parked_jobs = 0, back_runs = 0,
             back_jobs = 0, lines = 0;
    size_t cur = 0;
    broker_run_t *run;
    while ((run = broker_table_next(b->runs.by_id, &cur))) {
        char who[COMMON_KEY_FINGERPRINT + 8];
        uint8_t key[COMMON_KEY_BYTES];
        if (run->client_len &&
            (!broker_zap_key_admitted(b->zap, 0, run->client_key) ||
             broker_access_may_use(b, run, run->client_key) == BROKER_ACCESS_NO)) {
            /* Results held for it stay owed (unacked, and in the store); a
             * permitted key that connects later gets them. */
            uint64_t held = run->n_outbox + broker_table_size(run->unacked);
            char hex[BROKER_RID_HEX];
            if (lines++ < S_LOG_RUNS)
                LOG_WARN("run %s: cut off client %s (%s): its key is no longer admitted or "
                         "permitted; %" PRIu64 " results it had not acknowledged are withheld",
                         run->id, broker_rid_hex(run->client, run->client_len, hex),
                         broker_access_name(run->client_key, who), held);
            run->client_len = 0;
            run->client_key[0] = '\0';
            cut++;
            withheld += held;
        }
        int revoked = s_key(run->owner, key) && !broker_zap_key_admitted(b->zap, 0, run->owner);
        if (revoked && !run->parked) {
            uint64_t running = run->n_running;
            uint64_t n = broker_runs_park(&b->runs, run);
            if (lines++ < S_LOG_RUNS)
                LOG_WARN("run %s parked: its owner %s was removed from clients.allow; %" PRIu64
                         " queued jobs parked (no worker gets them), %" PRIu64
                         " running jobs finish into the store",
                         run->id, broker_access_name(run->owner, who), n, running);
            parked_runs++;
            parked_jobs += n;
        } else if (!revoked && run->parked) {
            uint64_t n = broker_runs_unpark(&b->runs, run);
            if (lines++ < S_LOG_RUNS)
                LOG_INFO("run %s unparked: its owner %s is admitted again; %" PRIu64
                         " queued jobs back in the queue",
                         run->id, broker_access_name(run->owner, who), n);
            back_runs++;
            back_jobs += n;
        }
    }
    if (cut || parked_runs)
        LOG_WARN("revocation: %" PRIu64 " client connections cut off (%" PRIu64
                 " unacknowledged results withheld), %" PRIu64 " runs parked (%" PRIu64
                 " queued jobs), %" PRIu64 " runs unparked (%" PRIu64 " queued jobs)%s",
                 cut, withheld, parked_runs, parked_jobs, back_runs, back_jobs,
                 lines > S_LOG_RUNS ? "; per-run lines past the first 20 not logged" : "");
    else if (back_runs)
        LOG_INFO("revocation lifted: %" PRIu64 " runs unparked (%" PRIu64 " queued jobs)%s",
                 back_runs, back_jobs,
                 lines > S_LOG_RUNS ? "; per-run lines past the first 20 not logged" : "");
}
