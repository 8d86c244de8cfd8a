/* access.h: who may use a run. A run belongs to the client key that created
 * it: its owner, kept with the run and in the store (runs.owner). A SUBMIT,
 * ACK or STATUS from a client is judged by the key its connection
 * authenticated with (the ZAP user id ZeroMQ attaches to every message, zap.h):
 *
 *   - the owner may submit to, attach to (resume), receive and acknowledge its
 *     run; so may a key the run is shared with (runs.share in the --keys
 *     folder, common/sharelist.h), without becoming its owner;
 *   - any other key gets one refusal, the same sentence for every run it may
 *     not use (BROKER_ACCESS_REFUSAL): nothing about the run (seed, seed
 *     mode, size, progress) is in it, its ACKs are ignored, status does not
 *     list the run;
 *   - one connection speaks for a run at a time: results go to it alone. A
 *     SUBMIT of the run (a 0-item one included) from another connection of
 *     a permitted key takes the run over, as a reconnecting client does; the
 *     previous connection gets nothing more. An ACK never takes a run over.
 *
 * Plaintext mode (--insecure, loopback or ipc only) has no keys: every
 * connection is the one identity BROKER_ACCESS_LOCAL, which owns the runs it
 * creates; local users are told apart by the endpoint's file permissions,
 * not by the broker. A run recorded before ownership was (owner NULL in the
 * store) is claimed by the first key that uses it, with a log line.
 *
 * Revocation (broker_access_sweep, at start and after each SIGHUP): a
 * connection whose key is no longer admitted, or no longer permitted on its
 * run, is cut off (nothing more is sent to it); a run whose owner key was
 * removed from clients.allow is parked (runs.h: its queued jobs stay queued
 * and in the store, no worker gets them; jobs already running finish and
 * their results wait in the store) and unparked when the key comes back.
 * Not here: admission of connections (zap.c), queue caps (quota.c). */
#ifndef BROKER_ACCESS_H
#define BROKER_ACCESS_H

#include "common/keyfile.h"
#include "core.h"

#define BROKER_ACCESS_LOCAL "local"
#define BROKER_ACCESS_REFUSAL                                                                   \
    "run %s is not available to this client key: it belongs to another key and is not "       \
    "shared with this one (choose another run id, or ask the broker's operator to share it)"

typedef enum {
    BROKER_ACCESS_NO = 0,
    BROKER_ACCESS_OWNER = 1,
    BROKER_ACCESS_SHARED = 2,
    BROKER_ACCESS_CLAIM = 3, /* no owner recorded: who may claim it */
} broker_access_t;

/* The identity of a client message's sender: user_id (the Z85 key ZAP gave)
 * under CURVE, BROKER_ACCESS_LOCAL in plaintext. NULL under CURVE when the
 * message carries no valid user id (then nothing is permitted). Borrowed. */
const char *broker_access_who(const broker_t *b, const char *user_id);
/* May who use run? */
broker_access_t broker_access_may_use(const broker_t *b, const broker_run_t *run,
                                      const char *who);
/* Short form of an identity for log lines: a key's fingerprint, else the text. */
const char *broker_access_name(const char *who, char out[COMMON_KEY_FINGERPRINT + 8]);

/* Reads the share list (keys_dir/runs.share; missing = none). At start a bad
 * list stops the broker (returns -1, logged); on reload the previous list is
 * kept (logged). */
int broker_access_load_shares(broker_t *b, const char *keys_dir, int reload);
/* Revocation, see the top. Logs what it cut and parked. No-op in plaintext. */
void broker_access_sweep(broker_t *b);
/* Frees the share list. */
void broker_access_fini(broker_t *b);

#endif
