/* keylist_append.c: one line onto a key list (see keylist_append.h). */
#include "keylist_append.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "common/keyfile.h"

int cli_keylist_append(const char *prog, const char *path, const char *header,
                       const uint8_t key[32], const char *text)
{
    struct stat st;
    int fresh = stat(path, &st) != 0;
    int fd = open(path, O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
    if (fd < 0) {
        fprintf(stderr, "%s: cannot open %s: %s\n", prog, path, strerror(errno));
        return 1;
    }
    char z85[COMMON_KEY_Z85 + 1];
    common_z85_encode_key(key, z85);
    char line[1024];
    int n = 0;
    if (fresh) {
        n = snprintf(line, sizeof line, "%s\n", header);
    } else if (st.st_size > 0) {
        /* A list whose last line lacks its newline must not swallow ours. */
        char last = '\n';
        int rfd = open(path, O_RDONLY | O_CLOEXEC);
        if (rfd >= 0) {
            if (pread(rfd, &last, 1, st.st_size - 1) != 1)
                last = '\n';
            close(rfd);
        }
        if (last != '\n')
            line[n++] = '\n';
    }
    int m = snprintf(line + n, sizeof line - (size_t)n, "%s %s\n", z85, text);
    if (m < 0 || (size_t)m >= sizeof line - (size_t)n) {
        close(fd);
        fprintf(stderr, "%s: the line for %s is too long\n", prog, path);
        return 1;
    }
    n += m;
    int ok = write(fd, line, (size_t)n) == n;
    ok = (close(fd) == 0) && ok;
    if (!ok) {
        fprintf(stderr, "%s: cannot write %s: %s\n", prog, path, strerror(errno));
        return 1;
    }
    return 0;
}
