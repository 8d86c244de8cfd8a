"""A client that the broker will not talk to is told why, at once, instead of
"no answer ... is fitfarm-broker running there?" after its whole time-out:
its key not on the allow-list (the sentence names the key's fingerprint,
checked against Python's hashlib.blake2b over the Z85-decoded key, RFC 7693 and
ZeroMQ RFC 32), the wrong --broker-key, plaintext against a CURVE broker, and
CURVE against a plaintext broker. Real broker, real keys made by
`fitfarm keygen`; the refusals come from libzmq's handshake events (ZAP status
400, mechanism mismatch) as the client library sees them."""
import os
import subprocess
import time

import fflib
import refs

FITFARM = fflib.exe("fitfarm")
check = fflib.Check("test_handshake_refusals")


def status(endpoint, security, timeout_s=20):
    t0 = time.time()
    r = subprocess.run([FITFARM, "status", "--broker", endpoint, "--timeout", str(timeout_s)]
                       + security, capture_output=True, text=True, timeout=120)
    return r.returncode, r.stderr.strip(), time.time() - t0


with fflib.Pool(secure=True) as pool:
    pool.start_broker()
    ep = pool.clients_ep
    stranger_pub, stranger_sec = fflib.make_key("stranger", pool.tmp)
    other_pub, _ = fflib.make_key("another-broker", pool.tmp)

    rc, err, took = status(ep, ["--key", pool.key("client.secret"),
                                "--broker-key", pool.key("broker.public")])
    check.ok(rc == 0, f"an admitted key is served (rc {rc}: {err})")

    rc, err, took = status(ep, ["--key", stranger_sec, "--broker-key", pool.key("broker.public")])
    fp = refs.key_fingerprint(stranger_pub)
    check.ok(rc == 1 and "refused this client's key" in err and fp in err
             and "fitfarm allow client" in err,
             f"a key not on the allow-list is told so with its fingerprint {fp}: {err}")
    check.ok(took < 10, f"... within seconds, not the 20 s time-out ({took:.1f} s)")

    rc, err, took = status(ep, ["--key", pool.key("client.secret"), "--broker-key", other_pub])
    check.ok(rc == 1 and "CURVE handshake" in err and other_pub in err,
             f"the wrong --broker-key is named: {err}")
    check.ok(took < 15, f"... before the time-out ({took:.1f} s)")

    rc, err, took = status(ep, ["--insecure"])
    check.ok(rc == 1 and "CURVE" in err and "--insecure" in err and "--broker-key" in err,
             f"plaintext against a CURVE broker says to use keys: {err}")
    check.ok(took < 15, f"... before the time-out ({took:.1f} s)")

with fflib.Pool(secure=False) as pool:
    pool.start_broker()
    keys = os.path.join(pool.tmp, "keys-here")
    _, csec = fflib.make_key("c", keys)
    bpub, _ = fflib.make_key("b", keys)
    rc, err, took = status(pool.clients_ep, ["--key", csec, "--broker-key", bpub])
    # libzmq reports the mechanism mismatch when our side sees it first;
    # when the broker closes first the client sees only an ended handshake,
    # and the sentence then names both causes.
    check.ok(rc == 1 and ("does not use CURVE" in err or "without CURVE (--insecure)" in err),
             f"CURVE against a plaintext broker says the broker may be plaintext: {err}")
    check.ok(took < 10, f"... within seconds ({took:.1f} s)")

check.done()
