/* replace_file.h: writing a small file so that readers see either the old
 * content or the whole new one, never half (a temporary name in the same
 * folder, then rename). The daemons' ready and endpoints files use it. */
#ifndef COMMON_REPLACE_FILE_H
#define COMMON_REPLACE_FILE_H

#include <stddef.h>

/* Writes text (len bytes) to path through path.tmp.PID and a rename; with
 * sync, fsyncs the data before the rename. Returns 0, or -1 with errno set
 * (the temporary file is removed). */
int common_replace_file(const char *path, const char *text, size_t len, int sync);

#endif
