/* fdreserve.h: the broker when descriptors run out. Internal to the broker.
 *
 * Every connection costs the broker one descriptor. When none is left,
 * libzmq's listener cannot accept: the waiting connection stays in the
 * kernel's queue, the listener stays readable, and libzmq's I/O thread
 * retries at once, for ever (100 % CPU), while the broker hears nothing.
 * This module listens for libzmq's ZMQ_EVENT_ACCEPT_FAILED monitor events and
 * answers EMFILE/ENFILE without a busy loop:
 *   - it keeps a reserve of a few descriptors (opened on /dev/null at start);
 *   - a refused client (the clients endpoint: `fitfarm status`, an optimizer)
 *     is let in: one reserve descriptor is closed, so libzmq's next accept
 *     takes it;
 *   - a refused worker connection closes the workers endpoint to new
 *     connections for a back-off time (0.5 s, doubling to 8 s while it
 *     recurs): a one-instruction BPF filter on the listener drops incoming
 *     packets, so connecting workers' SYNs go unanswered and their kernels
 *     retry later; the connections that completed before are shed by a
 *     helper process ("fitfarm-shed", TCP endpoints only) forked at start
 *     with a copy of the listener and nothing else: it accepts and closes them at once (the workers reconnect). It
 *     has descriptors when the broker has none; freeing one of the broker's
 *     for the purpose would race libzmq's I/O thread for it and lose the
 *     reserve;
 *   - the reserve serves clients only; freed ones are taken back as
 *     descriptors come free;
 *   - one warning line per 10 s at most says how many accepts failed, what
 *     was done, the limit, and how to raise it.
 * Connected peers are served throughout. The listeners' descriptors are found
 * once after binding (a socket in the listening state bound to the endpoint's
 * address). In CURVE mode the allow-list monitor (zap.c) forwards the events;
 * with --insecure this module opens the monitors itself.
 * Single-threaded, one broker per process (file-static state). */
#ifndef BROKER_FDRESERVE_H
#define BROKER_FDRESERVE_H

#include <stdint.h>
#include <zmq.h>

#define BROKER_FDRESERVE_COUNT 8       /* descriptors held back */
#define BROKER_FDRESERVE_LOG_MS 10000  /* one warning line per this long */
#define BROKER_FDRESERVE_SHED_MAX 256  /* connections shed per event at most */

enum { BROKER_FDRESERVE_CLIENTS = 0, BROKER_FDRESERVE_WORKERS = 1 };

/* Opens the reserve. Call once before the endpoints are bound. */
void broker_fdreserve_start(void);

/* Records router's listener (role: BROKER_FDRESERVE_*; bound: its
 * ZMQ_LAST_ENDPOINT); with own_monitor, also starts a monitor of its
 * ACCEPT_FAILED events on ctx (when no other monitor runs on router). */
void broker_fdreserve_watch(void *ctx, void *router, int role, const char *bound,
                            int own_monitor);

/* Poll items for the monitors this module owns (0 to 2), at most max. */
int broker_fdreserve_pollitems(zmq_pollitem_t *items, int max);

/* Reads this module's monitors (if any) when monitors_ready (the poll found
 * one readable), takes back freed reserves, logs. Call once per loop turn. */
void broker_fdreserve_handle(int64_t now_ms, int monitors_ready);

/* Milliseconds until the workers endpoint opens again, or -1: the loop's
 * poll must wake up for it. */
int64_t broker_fdreserve_timeout_ms(int64_t now_ms);

/* One ZMQ_EVENT_ACCEPT_FAILED (err: its value, an errno) on role's endpoint. */
void broker_fdreserve_accept_failed(int role, int err);

/* Closes the monitors and the reserve. */
void broker_fdreserve_stop(void);

#endif
