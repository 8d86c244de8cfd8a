/* proto_msg_fixture.h: shared by the wire-message tests (test_proto_msg.c,
 * test_proto_msg_refusals.c): a sample message of every type, built on
 * static data so it needs no freeing, and the checks both files make.
 * Test code only; compiled into fitfarm_unit_support. */
#ifndef TESTS_UNIT_PROTO_MSG_FIXTURE_H
#define TESTS_UNIT_PROTO_MSG_FIXTURE_H

#include <stddef.h>
#include <stdint.h>

#include "proto/msg.h"

#define FX_GENOME_A_LEN 5 /* bytes of fx_genome_a, the second SUBMIT item's genome */
#define FX_N_TAGS 11      /* entries of fx_tags: the ACK tags and HAND_BACK job ids */

extern uint8_t fx_genome_a[FX_GENOME_A_LEN];
extern uint64_t fx_tags[FX_N_TAGS];
extern const uint32_t fx_all_types[]; /* every message type, fx_n_types of them */
extern const size_t fx_n_types;

/* The bits of a double and back: compared as integers, so -0.0 and NaN
 * payloads count. */
uint64_t fx_bits(double d);
double fx_from_bits(uint64_t u);

/* A sample message of type (PROTO_*), pointing into static data. */
proto_msg_t fx_sample(uint32_t type);

/* Encodes m, decodes it, re-encodes the result and checks the two encodings
 * are the same bytes. Returns the decoded message (caller destroys it). */
proto_msg_t *fx_round_trip(const proto_msg_t *m);

/* Encodes m and returns the bytes (caller frees). */
uint8_t *fx_encode(const proto_msg_t *m, size_t *len);

/* Decodes bytes that must be refused with code; checks the error text
 * contains want (a field path, or NULL for any) and that nothing is returned. */
void fx_expect_refused(const uint8_t *buf, size_t len, const proto_limits_t *lim, int code,
                       const char *want);

#endif
