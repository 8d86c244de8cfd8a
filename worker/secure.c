/* secure.c: CURVE client setup of the worker (see secure.h). Owns nothing
 * beyond the time it takes to hand the keys to ZeroMQ. */
#include "secure.h"

#include <errno.h>
#include <string.h>
#include <zmq.h>

#include "common/endpoint.h"
#include "common/keyfile.h"
#include "common/log.h"

int worker_secure_check(const worker_config_t *config)
{
    if (config->insecure) {
        if (!common_endpoint_is_local(config->broker_endpoint)) {
            LOG_ERROR("refusing to connect without encryption to %s: --insecure is allowed "
                      "only to ipc://, inproc:// or loopback tcp:// endpoints. Make a key pair "
                      "with 'fitfarm keygen NAME', have the broker's owner run 'fitfarm allow "
                      "worker NAME.public --keys DIR', then start the worker with --key "
                      "NAME.secret --broker-key broker.public",
                      config->broker_endpoint);
            return -1;
        }
        return 0;
    }
    if (!config->key_file || !config->broker_key_file) {
        LOG_ERROR("no %s given: a worker needs its own secret key (--key NAME.secret) and the "
                  "broker's public key (--broker-key broker.public) to connect to %s. Make "
                  "a pair with 'fitfarm keygen NAME' and have the broker's owner run "
                  "'fitfarm allow worker NAME.public --keys DIR'; or, to a local broker only, "
                  "use --insecure",
                  !config->key_file ? "key" : "broker key", config->broker_endpoint);
        return -1;
    }
    /* Read both now, so a bad file stops the worker before it forks. */
    char err[768];
    uint8_t server[COMMON_KEY_BYTES];
    common_keypair_t *pair = NULL;
    if (common_keyfile_read_public(config->broker_key_file, server, err, sizeof err) != 0 ||
        common_keyfile_read_secret(config->key_file, &pair, err, sizeof err) != 0) {
        LOG_ERROR("%s", err);
        return -1;
    }
    char fp[COMMON_KEY_FINGERPRINT], sfp[COMMON_KEY_FINGERPRINT];
    common_key_fingerprint(pair->public_key, fp);
    common_key_fingerprint(server, sfp);
    LOG_INFO("CURVE on: worker key %s, broker key %s", fp, sfp);
    common_keypair_destroy(&pair);
    return 0;
}

int worker_secure_socket(void *sock, const worker_config_t *config)
{
    if (config->insecure)
        return 0;
    char err[768];
    uint8_t server[COMMON_KEY_BYTES];
    common_keypair_t *pair = NULL;
    int rc = -1;
    if (common_keyfile_read_public(config->broker_key_file, server, err, sizeof err) != 0 ||
        common_keyfile_read_secret(config->key_file, &pair, err, sizeof err) != 0) {
        LOG_ERROR("%s", err);
        goto cleanup;
    }
    if (zmq_setsockopt(sock, ZMQ_CURVE_SERVERKEY, server, COMMON_KEY_BYTES) != 0 ||
        zmq_setsockopt(sock, ZMQ_CURVE_PUBLICKEY, pair->public_key, COMMON_KEY_BYTES) != 0 ||
        zmq_setsockopt(sock, ZMQ_CURVE_SECRETKEY, pair->secret_key, COMMON_KEY_BYTES) != 0) {
        LOG_ERROR("cannot set the CURVE keys: %s", zmq_strerror(errno));
        goto cleanup;
    }
    rc = 0;
cleanup:
    common_keypair_destroy(&pair);
    return rc;
}
