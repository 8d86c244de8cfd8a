/* replace_file.c: see replace_file.h. */
#include "replace_file.h"

#include <errno.h>
#include <stdio.h>
#include <unistd.h>

int common_replace_file(const char *path, const char *text, size_t len, int sync)
{
    char tmp[4096];
    if (snprintf(tmp, sizeof tmp, "%s.tmp.%ld", path, (long)getpid()) >= (int)sizeof tmp) {
        errno = ENAMETOOLONG;
        return -1;
    }
    FILE *f = fopen(tmp, "w");
    if (!f)
        return -1;
    int ok = fwrite(text, 1, len, f) == len;
    ok &= fflush(f) == 0 && (!sync || fsync(fileno(f)) == 0);
    int saved = errno;
    ok &= fclose(f) == 0;
    if (!ok || rename(tmp, path) != 0) {
        saved = ok ? errno : saved;
        unlink(tmp);
        errno = saved;
        return -1;
    }
    return 0;
}
