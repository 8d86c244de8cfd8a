/* secure.c: CURVE client setup for libfitfarm (see secure.h). Owns nothing
 * beyond the call. */
#include "secure.h"

#include <errno.h>
#include <stdio.h>
#include <string.h>
#include <zmq.h>

#include "common/endpoint.h"
#include "common/keyfile.h"

int client_secure_socket(fitfarm_client_t *self, void *sock, const fitfarm_options_t *options)
{
    if (!options->broker)
        return FITFARM_OK; /* the embedded pool: ipc:// in a private folder */
    if (options->insecure) {
        if (!common_endpoint_is_local(options->broker))
            return client_fail(self, FITFARM_EINVAL,
                               "refusing plaintext to %s: insecure mode is allowed only to "
                               "ipc://, inproc:// or loopback tcp:// endpoints; use a key pair "
                               "('fitfarm keygen NAME', then the broker's owner runs 'fitfarm "
                               "allow client NAME.public --keys DIR') and the broker's public key",
                               options->broker);
        return FITFARM_OK;
    }
    if (!options->key_file || !options->broker_key_file)
        return client_fail(self, FITFARM_EINVAL,
                           "no %s for %s: a client needs its own secret key (--key "
                           "NAME.secret) and the broker's public key (--broker-key "
                           "broker.public); make a pair with 'fitfarm keygen NAME' and have the "
                           "broker's owner run 'fitfarm allow client NAME.public --keys DIR'; "
                           "or, to a local broker only, use --insecure",
                           !options->key_file ? "key" : "broker key", options->broker);
    char err[768];
    uint8_t server[COMMON_KEY_BYTES];
    common_keypair_t *pair = NULL;
    int rc = FITFARM_OK;
    if (common_keyfile_read_public(options->broker_key_file, server, err, sizeof err) != 0 ||
        common_keyfile_read_secret(options->key_file, &pair, err, sizeof err) != 0) {
        rc = client_fail(self, FITFARM_EINVAL, "%s", err);
        goto cleanup;
    }
    if (zmq_setsockopt(sock, ZMQ_CURVE_SERVERKEY, server, COMMON_KEY_BYTES) != 0 ||
        zmq_setsockopt(sock, ZMQ_CURVE_PUBLICKEY, pair->public_key, COMMON_KEY_BYTES) != 0 ||
        zmq_setsockopt(sock, ZMQ_CURVE_SECRETKEY, pair->secret_key, COMMON_KEY_BYTES) != 0)
        rc = client_fail(self, FITFARM_ESYSTEM, "cannot set the CURVE keys: %s",
                         zmq_strerror(errno));
    if (rc == FITFARM_OK) {
        self->curve = 1;
        common_key_fingerprint(pair->public_key, self->fingerprint);
        snprintf(self->broker_key_file, sizeof self->broker_key_file, "%s",
                 options->broker_key_file);
    }
cleanup:
    common_keypair_destroy(&pair);
    return rc;
}
