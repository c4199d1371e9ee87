/*
 * io/rejects.c - reject images under a disk cap (layout in rejects.h).
 */
#include "rejects.h"

#include "error.h"

#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#define REJ_PATH_LEN 1024

struct mb_rejects {
    char folder[REJ_PATH_LEN];
    uint64_t cap, total, deleted;
};

/* A day folder name: YYYY-MM-DD. */
static int is_day(const char *s)
{
    if (strlen(s) != 10 || s[4] != '-' || s[7] != '-')
        return 0;
    for (int i = 0; i < 10; i++)
        if (i != 4 && i != 7 && (s[i] < '0' || s[i] > '9'))
            return 0;
    return 1;
}

static int is_png(const char *s)
{
    size_t n = strlen(s);
    return n > 4 && strcmp(s + n - 4, ".png") == 0;
}

static int by_name(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Sorted names in dir passing keep(); *n set. NULL with *n = 0 when empty
   or unreadable (*failed set when unreadable or out of memory). */
static char **list_sorted(const char *dir, int (*keep)(const char *), int *n,
                          int *failed)
{
    *n = 0;
    DIR *d = opendir(dir);
    if (!d) {
        *failed = 1;
        return NULL;
    }
    char **names = NULL;
    int cap = 0;
    struct dirent *e;
    while ((e = readdir(d)) != NULL) {
        if (!keep(e->d_name))
            continue;
        if (*n == cap) {
            int nc = cap ? 2 * cap : 64;
            char **nn = realloc(names, (size_t)nc * sizeof *nn);
            if (!nn) {
                *failed = 1;
                break;
            }
            names = nn;
            cap = nc;
        }
        if (!(names[*n] = strdup(e->d_name))) {
            *failed = 1;
            break;
        }
        (*n)++;
    }
    closedir(d);
    if (*n > 1)
        qsort(names, (size_t)*n, sizeof *names, by_name);
    return names;
}

static void free_list(char **names, int n)
{
    for (int i = 0; i < n; i++)
        free(names[i]);
    free(names);
}

/* Walk the images oldest first; with delete_to set, delete until the total
   is at most delete_to; else just add up. */
static int walk(mb_rejects *r, int deleting, uint64_t delete_to)
{
    int nd = 0, failed = 0, removed = 0;
    char **days = list_sorted(r->folder, is_day, &nd, &failed);
    if (!deleting)
        r->total = 0;
    for (int i = 0; i < nd; i++) {
        if (deleting && r->total <= delete_to)
            break;
        char dpath[REJ_PATH_LEN + 16];
        snprintf(dpath, sizeof dpath, "%s/%s", r->folder, days[i]);
        int nf = 0;
        char **files = list_sorted(dpath, is_png, &nf, &failed);
        for (int j = 0; j < nf; j++) {
            if (deleting && r->total <= delete_to)
                break;
            char fpath[REJ_PATH_LEN + 300];
            snprintf(fpath, sizeof fpath, "%s/%s", dpath, files[j]);
            struct stat st;
            if (stat(fpath, &st) != 0 || !S_ISREG(st.st_mode))
                continue;
            uint64_t sz = (uint64_t)st.st_size;
            if (!deleting) {
                r->total += sz;
            } else if (unlink(fpath) == 0) {
                r->total = r->total > sz ? r->total - sz : 0;
                r->deleted++;
                removed++;
            }
        }
        free_list(files, nf);
        if (deleting)
            rmdir(dpath); /* only succeeds once the day is empty */
    }
    free_list(days, nd);
    return failed && !deleting ? MB_EIO : removed;
}

int mb_rejects_open(const char *folder, int cap_mb, mb_rejects **out,
                    char *err)
{
    if (!out || !folder || !folder[0] || cap_mb < 0 ||
        strlen(folder) >= REJ_PATH_LEN)
        return mb_err_set(err, MB_EINVAL,
                          "reject images: expected a folder and a cap of 0 "
                          "or more MB");
    *out = NULL;
    mb_rejects *r = calloc(1, sizeof *r);
    if (!r)
        return mb_err_set(err, MB_ENOMEM, "reject images: out of memory");
    snprintf(r->folder, sizeof r->folder, "%s", folder);
    r->cap = (uint64_t)cap_mb * 1024u * 1024u;
    if (cap_mb > 0) {
        if (mkdir(folder, 0755) != 0 && errno != EEXIST) {
            int e = errno;
            free(r);
            return mb_err_set(err, MB_EIO,
                              "%s: cannot make the reject image folder: %s",
                              folder, strerror(e));
        }
        if (walk(r, 0, 0) < 0) {
            free(r);
            return mb_err_set(err, MB_EIO,
                              "%s: cannot read the reject image folder",
                              folder);
        }
    }
    *out = r;
    return MB_OK;
}

void mb_rejects_close(mb_rejects *r)
{
    free(r);
}

int mb_rejects_path(mb_rejects *r, int64_t now_ms, uint32_t seq, char *out,
                    size_t size, char *err)
{
    if (!r || !out || size == 0)
        return mb_err_set(err, MB_EINVAL, "reject images: no store or buffer");
    if (r->cap == 0)
        return mb_err_set(err, MB_ERANGE,
                          "reject images: saving is off (cap_mb is 0)");
    int64_t sec = now_ms >= 0 ? now_ms / 1000 : -((-now_ms + 999) / 1000);
    int milli = (int)(now_ms - sec * 1000);
    time_t t = (time_t)sec;
    struct tm tm;
    if (!localtime_r(&t, &tm))
        return mb_err_set(err, MB_EINVAL, "reject images: bad time");
    unsigned y = (unsigned)(tm.tm_year + 1900) % 10000u;
    unsigned mo = (unsigned)(tm.tm_mon + 1) % 100u;
    unsigned d = (unsigned)tm.tm_mday % 100u;
    int n = snprintf(out, size, "%s/%04u-%02u-%02u", r->folder, y, mo, d);
    if (n < 0 || (size_t)n >= size)
        return mb_err_set(err, MB_ESIZE, "reject images: path too long");
    if (mkdir(out, 0755) != 0 && errno != EEXIST)
        return mb_err_set(err, MB_EIO, "%s: cannot make the folder: %s", out,
                          strerror(errno));
    n = snprintf(out, size, "%s/%04u-%02u-%02u/%02u%02u%02u.%03u_%lu.png",
                 r->folder, y, mo, d, (unsigned)tm.tm_hour % 100u,
                 (unsigned)tm.tm_min % 100u, (unsigned)tm.tm_sec % 100u,
                 (unsigned)milli % 1000u, (unsigned long)seq);
    if (n < 0 || (size_t)n >= size)
        return mb_err_set(err, MB_ESIZE, "reject images: path too long");
    return MB_OK;
}

int mb_rejects_added(mb_rejects *r, const char *path, char *err)
{
    if (!r || !path)
        return mb_err_set(err, MB_EINVAL, "reject images: no store or path");
    struct stat st;
    if (stat(path, &st) != 0)
        return mb_err_set(err, MB_EIO, "%s: cannot read the saved image: %s",
                          path, strerror(errno));
    r->total += (uint64_t)st.st_size;
    if (r->cap == 0 || r->total <= r->cap)
        return 0;
    return walk(r, 1, r->cap / 10 * 9);
}

uint64_t mb_rejects_bytes(const mb_rejects *r)
{
    return r ? r->total : 0;
}

uint64_t mb_rejects_deleted(const mb_rejects *r)
{
    return r ? r->deleted : 0;
}
