/* test_proto_keyfile.c: key files, Z85, fingerprints, allow-lists, the config
 * file and the local-endpoint test (proto/common). Outside references: the
 * Z85 test vector of ZeroMQ RFC 32, and BLAKE2b-256 from Python's
 * hashlib.blake2b (RFC 7693) for the fingerprint. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>
#include <sodium.h>

#include "proto/common/allowlist.h"
#include "proto/common/sharelist.h"
#include "proto/common/config.h"
#include "proto/common/endpoint.h"
#include "proto/common/keyfile.h"

/* Usage: make a pair, write it, read both files back. */
static void test_usage_example(void **state)
{
    (void)state;
    char dir[] = "/tmp/fitfarm-keyfile-XXXXXX";
    assert_non_null(mkdtemp(dir));
    common_keypair_t *pair = NULL, *back = NULL;
    assert_int_equal(common_keypair_new(&pair), 0);
    char pub[512], sec[512], err[512];
    assert_int_equal(common_keyfile_write_pair(dir, "lab-pc", pair, pub, sizeof pub, sec,
                                               sizeof sec, err, sizeof err),
                     0);
    uint8_t key[32];
    assert_int_equal(common_keyfile_read_public(pub, key, err, sizeof err), 0);
    assert_memory_equal(key, pair->public_key, 32);
    assert_int_equal(common_keyfile_read_secret(sec, &back, err, sizeof err), 0);
    assert_memory_equal(back->secret_key, pair->secret_key, 32);
    /* a second keygen into the same place is refused */
    assert_int_equal(common_keyfile_write_pair(dir, "lab-pc", pair, NULL, 0, NULL, 0, err,
                                               sizeof err),
                     -1);
    assert_non_null(strstr(err, "refusing to overwrite"));
    common_keypair_destroy(&pair);
    common_keypair_destroy(&back);
    unlink(pub);
    unlink(sec);
    rmdir(dir);
}

/* ZeroMQ RFC 32: 86 4F D2 6F B5 59 F7 5B <-> "HelloWorld". */
static void test_z85_rfc32(void **state)
{
    (void)state;
    const uint8_t bytes[8] = {0x86, 0x4F, 0xD2, 0x6F, 0xB5, 0x59, 0xF7, 0x5B};
    uint8_t out[8];
    assert_int_equal(common_z85_decode("HelloWorld", 10, out), 0);
    assert_memory_equal(out, bytes, 8);
    uint8_t key[32] = {0};
    memcpy(key, bytes, 8);
    char z[41];
    common_z85_encode_key(key, z);
    assert_memory_equal(z, "HelloWorld", 10);
    assert_int_equal(common_z85_decode("Hello~orld", 10, out), -1); /* not in the alphabet */
    assert_int_equal(common_z85_decode("#####", 5, out), -1);       /* past 2^32-1 */
}

/* Python: hashlib.blake2b(bytes(range(32)), digest_size=32).hexdigest()[:16] */
static void test_fingerprint(void **state)
{
    (void)state;
    assert_true(sodium_init() >= 0);
    uint8_t key[32];
    for (int i = 0; i < 32; i++)
        key[i] = (uint8_t)i;
    char fp[17];
    common_key_fingerprint(key, fp);
    assert_string_equal(fp, "cb2f5160fc1f7e05");
}

static void test_key_file_errors(void **state)
{
    (void)state;
    char err[512];
    uint8_t key[32];
    const char *two = "# c\nHelloWorldHelloWorldHelloWorldHelloWorld\nHelloWorldHelloWorldHelloWorldHelloWorld\n";
    assert_int_equal(common_keyfile_parse_public(two, strlen(two), key, err, sizeof err), -1);
    assert_non_null(strstr(err, "line 3"));
    const char *secret = "secret: HelloWorldHelloWorldHelloWorldHelloWorld\n";
    assert_int_equal(common_keyfile_parse_public(secret, strlen(secret), key, err, sizeof err), -1);
    assert_non_null(strstr(err, "SECRET"));
    const char *shortk = "HelloWorld\n";
    assert_int_equal(common_keyfile_parse_public(shortk, strlen(shortk), key, err, sizeof err), -1);
    assert_non_null(strstr(err, "10 characters"));
    assert_int_equal(common_keyfile_parse_public("# only\n", 7, key, err, sizeof err), -1);
    const char *ok = "  HelloWorldHelloWorldHelloWorldHelloWorld \r\n";
    assert_int_equal(common_keyfile_parse_public(ok, strlen(ok), key, err, sizeof err), 0);
    common_keypair_t *pair = sodium_malloc(sizeof *pair);
    const char *pubonly = "HelloWorldHelloWorldHelloWorldHelloWorld\n";
    assert_int_equal(common_keyfile_parse_secret(pubonly, strlen(pubonly), pair, err, sizeof err), -1);
    assert_non_null(strstr(err, "public key file"));
    sodium_free(pair);
}

static void test_allowlist(void **state)
{
    (void)state;
    const char *text = "# clients\nHelloWorldHelloWorldHelloWorldHelloWorld lab pc 1\n\n"
                       "0000000000000000000000000000000000000000\n";
    common_allowlist_t *l = NULL;
    char err[512];
    assert_int_equal(common_allowlist_parse(text, strlen(text), &l, err, sizeof err), 0);
    assert_int_equal(common_allowlist_size(l), 2);
    uint8_t key[32];
    common_z85_decode("HelloWorldHelloWorldHelloWorldHelloWorld", 40, key);
    const common_allow_entry_t *e = common_allowlist_find(l, key);
    assert_non_null(e);
    assert_string_equal(e->label, "lab pc 1");
    key[0] ^= 1;
    assert_null(common_allowlist_find(l, key));
    /* Every entry once through common_allowlist_at, each found by its key,
     * then NULL past the end. */
    for (size_t i = 0; i < 2; i++) {
        const common_allow_entry_t *at = common_allowlist_at(l, i);
        assert_non_null(at);
        assert_ptr_equal(common_allowlist_find(l, at->key), at);
    }
    assert_ptr_not_equal(common_allowlist_at(l, 0), common_allowlist_at(l, 1));
    assert_null(common_allowlist_at(l, 2));
    assert_null(common_allowlist_at(NULL, 0));
    common_allowlist_destroy(&l);
    const char *dup = "HelloWorldHelloWorldHelloWorldHelloWorld\nHelloWorldHelloWorldHelloWorldHelloWorld x\n";
    assert_int_equal(common_allowlist_parse(dup, strlen(dup), &l, err, sizeof err), -1);
    assert_non_null(strstr(err, "twice"));
    const char *bad = "HelloWorldHelloWorldHelloWorldHelloWorldX\n";
    assert_int_equal(common_allowlist_parse(bad, strlen(bad), &l, err, sizeof err), -1);
    assert_non_null(strstr(err, "line 1"));
}

/* The run share list: key, then the run id as the rest of the line. */
static void test_sharelist(void **state)
{
    (void)state;
    const char *text = "# shares\nHelloWorldHelloWorldHelloWorldHelloWorld  gen run 7 \r\n"
                       "0000000000000000000000000000000000000000\tgen run 7\n"
                       "HelloWorldHelloWorldHelloWorldHelloWorld other\n";
    common_sharelist_t *l = NULL;
    char err[512];
    assert_int_equal(common_sharelist_parse(text, strlen(text), &l, err, sizeof err), 0);
    assert_int_equal(common_sharelist_size(l), 3);
    uint8_t key[32];
    common_z85_decode("HelloWorldHelloWorldHelloWorldHelloWorld", 40, key);
    assert_int_equal(common_sharelist_has(l, "gen run 7", key), 1);
    assert_int_equal(common_sharelist_has(l, "other", key), 1);
    assert_int_equal(common_sharelist_has(l, "gen run", key), 0);
    key[0] ^= 1;
    assert_int_equal(common_sharelist_has(l, "gen run 7", key), 0);
    assert_int_equal(common_sharelist_has(NULL, "gen run 7", key), 0);
    common_sharelist_destroy(&l);
    const char *nokey = "HelloWorldHelloWorldHelloWorldHelloWorld\n";
    assert_int_equal(common_sharelist_parse(nokey, strlen(nokey), &l, err, sizeof err), -1);
    assert_non_null(strstr(err, "line 1"));
    const char *dup = "HelloWorldHelloWorldHelloWorldHelloWorld r\nHelloWorldHelloWorldHelloWorldHelloWorld r\n";
    assert_int_equal(common_sharelist_parse(dup, strlen(dup), &l, err, sizeof err), -1);
    assert_non_null(strstr(err, "twice"));
    const char *ctl = "HelloWorldHelloWorldHelloWorldHelloWorld r\x01x\n";
    assert_int_equal(common_sharelist_parse(ctl, strlen(ctl), &l, err, sizeof err), -1);
    assert_non_null(strstr(err, "control"));
    char longid[200];
    memset(longid, 'a', sizeof longid - 1);
    longid[sizeof longid - 1] = '\0';
    assert_int_equal(common_sharelist_run_ok(longid), -1);
    assert_int_equal(common_sharelist_run_ok(" lead"), -1);
    assert_int_equal(common_sharelist_run_ok("ok id"), 0);
}

static void test_config_and_precedence(void **state)
{
    (void)state;
    const char *text = "# settings\nkey = /a b/c.secret\n broker_key=/k.public \n";
    common_config_t *c = NULL;
    char err[512];
    assert_int_equal(common_config_parse(text, strlen(text), &c, err, sizeof err), 0);
    assert_string_equal(common_config_get(c, "key"), "/a b/c.secret");
    assert_string_equal(common_config_get(c, "broker_key"), "/k.public");
    const char *src = NULL;
    unsetenv("FITFARM_KEY");
    assert_string_equal(common_config_resolve(NULL, "FITFARM_KEY", c, "key", &src), "/a b/c.secret");
    assert_string_equal(src, "config");
    setenv("FITFARM_KEY", "/env.secret", 1);
    assert_string_equal(common_config_resolve(NULL, "FITFARM_KEY", c, "key", &src), "/env.secret");
    assert_string_equal(common_config_resolve("/flag", "FITFARM_KEY", c, "key", &src), "/flag");
    assert_string_equal(src, "flag");
    unsetenv("FITFARM_KEY");
    assert_null(common_config_resolve(NULL, "FITFARM_KEY", c, "broker", &src));
    common_config_destroy(&c);
    const char *bad = "key = a\nkey = b\n";
    assert_int_equal(common_config_parse(bad, strlen(bad), &c, err, sizeof err), -1);
    assert_non_null(strstr(err, "line 2"));
    assert_int_equal(common_config_parse("x = 1\n", 6, &c, err, sizeof err), -1);
    assert_non_null(strstr(err, "unknown setting"));

    /* "~/" in a path is $HOME, as a POSIX shell's tilde expansion (common
     * practice); "~user" and a ~ inside the path, or in the endpoint, stay. */
    setenv("HOME", "/home/ff user", 1);
    const char *tilde = "key = ~/.fitfarm/a.secret\nbroker_key = ~other/b.public\n"
                        "keys_dir = ~\nbroker = tcp://~:1\n";
    assert_int_equal(common_config_parse(tilde, strlen(tilde), &c, err, sizeof err), 0);
    assert_string_equal(common_config_get(c, "key"), "/home/ff user/.fitfarm/a.secret");
    assert_string_equal(common_config_get(c, "broker_key"), "~other/b.public");
    assert_string_equal(common_config_get(c, "keys_dir"), "/home/ff user");
    assert_string_equal(common_config_get(c, "broker"), "tcp://~:1");
    common_config_destroy(&c);
    unsetenv("HOME");
    assert_int_equal(common_config_parse("key = ~/a\n", 10, &c, err, sizeof err), -1);
    assert_non_null(strstr(err, "HOME"));
    assert_non_null(strstr(err, "line 1"));
}

static void test_local_endpoints(void **state)
{
    (void)state;
    assert_true(common_endpoint_is_local("ipc:///tmp/x"));
    assert_true(common_endpoint_is_local("inproc://a"));
    assert_true(common_endpoint_is_local("tcp://127.0.0.1:*"));
    assert_true(common_endpoint_is_local("tcp://127.1.2.3:5555"));
    assert_true(common_endpoint_is_local("tcp://[::1]:5555"));
    assert_true(common_endpoint_is_local("tcp://localhost:5555"));
    assert_false(common_endpoint_is_local("tcp://0.0.0.0:5555"));
    assert_false(common_endpoint_is_local("tcp://*:5555"));
    assert_false(common_endpoint_is_local("tcp://127.0.0.1.evil.org:5555"));
    assert_false(common_endpoint_is_local("tcp://1270.0.0.1:5555"));
    assert_false(common_endpoint_is_local("tcp://eth0:5555"));
    assert_false(common_endpoint_is_local("tcp://127.0.0.1;10.0.0.1:5555"));
    assert_false(common_endpoint_is_local("udp://127.0.0.1:5555"));
    assert_false(common_endpoint_is_local(NULL));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_usage_example),   cmocka_unit_test(test_z85_rfc32),
        cmocka_unit_test(test_fingerprint),     cmocka_unit_test(test_key_file_errors),
        cmocka_unit_test(test_allowlist),       cmocka_unit_test(test_config_and_precedence),
        cmocka_unit_test(test_local_endpoints), cmocka_unit_test(test_sharelist),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
