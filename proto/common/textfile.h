/* textfile.h: reading a small text file whole, and splitting text into
 * content lines. Shared by the key file, config file and allow-list parsers so
 * that each of them keeps only its own rules: what a line means, its caps and
 * its messages. Nothing here aborts or logs; not part of any public API. */
#ifndef COMMON_TEXTFILE_H
#define COMMON_TEXTFILE_H

#include <stddef.h>
#include <sys/stat.h>

/* Flags of common_textfile_read. REGULAR: anything but a regular file is an
 * error. MISSING_OK: a missing file (ENOENT) is COMMON_TEXTFILE_MISSING.
 * SECRET: refuse a file others may read (mode & 077) before reading a byte,
 * and hold the text in sodium_malloc memory. */
#define COMMON_TEXTFILE_REGULAR 1
#define COMMON_TEXTFILE_MISSING_OK 2
#define COMMON_TEXTFILE_SECRET 4

/* Outcomes of common_textfile_read other than 0 and -1; err is left alone
 * for these, so the caller words them in its own terms. MISSING (only with
 * MISSING_OK) and EXPOSED (only with SECRET): *buf is NULL. TOO_LONG: more
 * than max_bytes; *buf holds the first max_bytes + 1 bytes, not
 * NUL-terminated, and *len = max_bytes + 1. */
#define COMMON_TEXTFILE_MISSING 1
#define COMMON_TEXTFILE_TOO_LONG 2
#define COMMON_TEXTFILE_EXPOSED 3

/* Reads the file at path whole, up to max_bytes: opens it read-only (no
 * controlling terminal, closed on exec), reads until end of file or until it
 * has more than max_bytes, and NUL-terminates the text.
 * Returns 0 with *buf (text, NUL-terminated) and *len; a COMMON_TEXTFILE_*
 * outcome above; or -1 with a sentence in err (cannot open, not a regular
 * file, cannot read, out of memory). Messages name the file as "<what> <path>",
 * or the bare path when what is NULL: e.g. "cannot open key file k: ...".
 * st (may be NULL) receives the file's status for every outcome but a failed
 * open. The caller owns *buf whenever it is not NULL, and frees it with
 * sodium_free after COMMON_TEXTFILE_SECRET, else with free. A regular file is
 * first read into a buffer of its stated size, so memory follows the file
 * rather than the cap. Blocks on the file system; thread-safe. */
int common_textfile_read(const char *path, const char *what, size_t max_bytes, int flags,
                         char **buf, size_t *len, struct stat *st, char *err, size_t errlen);

/* Puts the file's name before the sentence in err, as "<what> <path>: <err>"
 * (what NULL: "<path>: <err>"), for a parser's message about a file's text.
 * err keeps at most its first 511 bytes. */
void common_textfile_prefix(char *err, size_t errlen, const char *what, const char *path);

/* Flag of common_textfile_lines: a line holding a control character other
 * than tab (or a final '\r') is an error, checked before trimming, so comment
 * and blank lines count too. */
#define COMMON_TEXTFILE_NO_CONTROLS 1

/* Called for each content line: line (not NUL-terminated) and its length,
 * its 1-based number in the text, the caller's arg. Returns 0 to go on, or
 * -1 with a sentence in err to stop. */
typedef int (*common_textfile_line_cb)(const char *line, size_t len, long number, void *arg,
                                       char *err, size_t errlen);

/* Splits text (len bytes) on '\n'; trims spaces and tabs from both ends of
 * each line, and '\r's from its end; skips empty lines and lines starting with
 * '#'; calls cb for each other line. Returns 0, or -1 at the first error (of
 * cb, or "line N: a control character" under COMMON_TEXTFILE_NO_CONTROLS). */
int common_textfile_lines(const char *text, size_t len, int flags, common_textfile_line_cb cb,
                          void *arg, char *err, size_t errlen);

#endif
