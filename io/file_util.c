/*
 * io/file_util.c - whole-file reads; writes by temporary file, fsync and
 * rename (rename(2) replaces the target atomically on POSIX file systems).
 */
#include "file_util.h"

#include "error.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

int mb_file_read_all(const char *path, size_t max_len, char **out, size_t *len,
                     char *err)
{
    *out = NULL;
    *len = 0;
    if (!path)
        return mb_err_set(err, MB_EINVAL, "no file name given");
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0) {
        int code = errno == ENOENT ? MB_ENOTFOUND : MB_EIO;
        return mb_err_set(err, code, "%s: cannot open: %s", path,
                          strerror(errno));
    }
    struct stat st;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
        close(fd);
        return mb_err_set(err, MB_EIO, "%s: not a regular file", path);
    }
    if ((unsigned long long)st.st_size > (unsigned long long)max_len) {
        close(fd);
        return mb_err_set(err, MB_EIO,
                          "%s: %lld bytes is larger than the %zu bytes "
                          "expected at most for this kind of file",
                          path, (long long)st.st_size, max_len);
    }
    size_t cap = (size_t)st.st_size;
    char *buf = malloc(cap + 1);
    if (!buf) {
        close(fd);
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory for %zu bytes",
                          path, cap);
    }
    size_t got = 0;
    while (got < cap) {
        ssize_t r = read(fd, buf + got, cap - got);
        if (r < 0 && errno == EINTR)
            continue;
        if (r < 0) {
            int e = errno;
            free(buf);
            close(fd);
            return mb_err_set(err, MB_EIO, "%s: read failed: %s", path,
                              strerror(e));
        }
        if (r == 0)
            break; /* the file shrank while we read it: take what is there */
        got += (size_t)r;
    }
    close(fd);
    buf[got] = '\0';
    *out = buf;
    *len = got;
    return MB_OK;
}

/* fsync the folder holding path; a failure here is reported, since the
   rename may then not survive a power loss. */
static int sync_folder(const char *path, char *err)
{
    char *dir = strdup(path);
    if (!dir)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
    char *slash = strrchr(dir, '/');
    if (!slash)
        strcpy(dir, ".");
    else if (slash == dir)
        slash[1] = '\0';
    else
        *slash = '\0';
    int rc = MB_OK;
    int fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (fd < 0 || fsync(fd) != 0)
        rc = mb_err_set(err, MB_EIO, "%s: cannot sync folder %s: %s", path, dir,
                        strerror(errno));
    if (fd >= 0)
        close(fd);
    free(dir);
    return rc;
}

int mb_file_write_atomic(const char *path, const void *data, size_t len,
                         char *err)
{
    if (!path || (!data && len))
        return mb_err_set(err, MB_EINVAL, "no file name or no data to write");
    size_t n = strlen(path);
    char *tmp = malloc(n + 5);
    if (!tmp)
        return mb_err_set(err, MB_ENOMEM, "%s: out of memory", path);
    memcpy(tmp, path, n);
    memcpy(tmp + n, ".tmp", 5);
    int fd = open(tmp, O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
    if (fd < 0) {
        int rc = mb_err_set(err, MB_EIO, "%s: cannot create %s: %s", path, tmp,
                            strerror(errno));
        free(tmp);
        return rc;
    }
    const char *p = data;
    size_t done = 0;
    while (done < len) {
        ssize_t w = write(fd, p + done, len - done);
        if (w < 0 && errno == EINTR)
            continue;
        if (w < 0)
            goto fail;
        done += (size_t)w;
    }
    if (fsync(fd) != 0)
        goto fail;
    if (close(fd) != 0) {
        fd = -1;
        goto fail;
    }
    fd = -1;
    if (rename(tmp, path) != 0)
        goto fail;
    free(tmp);
    return sync_folder(path, err);
fail:;
    int e = errno;
    if (fd >= 0)
        close(fd);
    unlink(tmp);
    free(tmp);
    return mb_err_set(err, MB_EIO, "%s: write failed: %s", path, strerror(e));
}
