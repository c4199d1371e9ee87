/*
 * io/file_util.h - whole-file reads and crash-safe whole-file writes.
 */
#ifndef MB_FILE_UTIL_H
#define MB_FILE_UTIL_H

#include <stddef.h>

/**
 * Read a whole regular file into a malloc'd buffer (*out, NUL-terminated
 * for convenience; *len excludes the NUL). The caller frees *out.
 * Return value: 0; MB_ENOTFOUND (no such file); MB_EIO (unreadable, not a
 * regular file, or larger than max_len bytes); MB_ENOMEM. err names the file.
 */
int mb_file_read_all(const char *path, size_t max_len, char **out, size_t *len,
                     char *err);

/**
 * Write len bytes to path so that a crash leaves either the old file or the
 * new one, never half of it: write "path.tmp", fsync it, rename it over
 * path, then fsync the folder so the rename itself is durable.
 * Return value: 0; MB_EINVAL; MB_EIO (the temporary file is removed); err
 * names the file.
 */
int mb_file_write_atomic(const char *path, const void *data, size_t len,
                         char *err);

#endif
