/* endpoint.h: is a ZeroMQ endpoint reachable only from this machine? Decides
 * where plaintext (--insecure) is allowed: ipc://, inproc://, and tcp:// on a
 * loopback address (127.0.0.0/8, [::1], localhost). Anything else, including
 * interface names, wildcards and "source;destination" forms, is not local. */
#ifndef COMMON_ENDPOINT_H
#define COMMON_ENDPOINT_H

/* 1 if local as above, else 0. NULL is not local. */
int common_endpoint_is_local(const char *endpoint);

#endif
