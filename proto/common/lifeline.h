/* lifeline.h: a daemon started by another process (the client library's
 * embedded pool) watches the read end of a pipe whose only write end that
 * process holds. When the starter dies, however it dies, the kernel closes the
 * write end and the read end reports end of file: the daemon stops by itself.
 *
 * Why a pipe and not PR_SET_PDEATHSIG: the death signal fires when the
 * *thread* that started the child exits, which in a threaded host (a Python
 * interpreter) is any short-lived thread, not the process. */
#ifndef COMMON_LIFELINE_H
#define COMMON_LIFELINE_H

/* Parses the --lifeline-fd value: a descriptor number from 3 to 1023 that is
 * open in this process. Returns the descriptor, made non-blocking, or -1 (and
 * writes a sentence to err) when the text is not such a number. */
int common_lifeline_open(const char *text, char *err, unsigned long errlen);

/* Call when poll says the descriptor is readable or hung up. Reads what is
 * there (a starter never writes: any bytes are discarded). Returns 1 when the
 * write end is gone (end of file or a read error other than "try again"), 0
 * while the starter lives. Never blocks. */
int common_lifeline_gone(int fd);

#endif
