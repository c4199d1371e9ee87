/* io/file_list.c - sorted folder listings. */
#include "file_list.h"

#include "error.h"

#include <dirent.h>
#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

static int has_ext(const char *name, const char *const *exts, int n_exts)
{
    size_t n = strlen(name);
    for (int i = 0; i < n_exts; i++) {
        size_t e = strlen(exts[i]);
        if (n > e && !strcasecmp(name + n - e, exts[i]))
            return 1;
    }
    return 0;
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

void mb_file_list_free(mb_file_list *l)
{
    if (!l)
        return;
    for (int i = 0; i < l->count; i++)
        free(l->paths[i]);
    free(l->paths);
    l->paths = NULL;
    l->count = 0;
}

int mb_file_list_dir(const char *dir, const char *const *exts, int n_exts,
                     mb_file_list *out, char *err)
{
    if (!dir || !out)
        return MB_EINVAL;
    memset(out, 0, sizeof *out);
    DIR *d = opendir(dir);
    if (!d) {
        int code = errno == ENOENT ? MB_ENOTFOUND : MB_EIO;
        return mb_err_set(err, code, "%s: cannot open folder: %s", dir,
                          strerror(errno));
    }
    int cap = 0, rc = MB_OK;
    struct dirent *e;
    while ((e = readdir(d)) != NULL) {
        if (e->d_name[0] == '.' || !has_ext(e->d_name, exts, n_exts))
            continue;
        size_t len = strlen(dir) + strlen(e->d_name) + 2;
        char *p = malloc(len);
        if (!p) {
            rc = MB_ENOMEM;
            goto fail;
        }
        snprintf(p, len, "%s/%s", dir, e->d_name);
        struct stat st;
        if (stat(p, &st) != 0 || !S_ISREG(st.st_mode)) {
            free(p);
            continue;
        }
        if (out->count == cap) {
            int ncap = cap ? cap * 2 : 64;
            char **np = realloc(out->paths, (size_t)ncap * sizeof *np);
            if (!np) {
                free(p);
                rc = MB_ENOMEM;
                goto fail;
            }
            out->paths = np;
            cap = ncap;
        }
        out->paths[out->count++] = p;
    }
    closedir(d);
    if (out->count > 1)
        qsort(out->paths, (size_t)out->count, sizeof *out->paths, cmp_str);
    return MB_OK;
fail:
    closedir(d);
    mb_file_list_free(out);
    return mb_err_set(err, rc, "%s: out of memory while listing the folder", dir);
}
