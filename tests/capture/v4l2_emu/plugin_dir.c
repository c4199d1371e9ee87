/*
 * tests/capture/v4l2_emu/plugin_dir.c - point libv4l2's plugin search at
 * the test build's folder, without root and without touching the machine.
 *
 * libv4l2 (v4l-utils 1.22, lib/libv4l2/v4l2-plugin.c) finds its plugins
 * with glob(LIBV4L2_PLUGIN_DIR "/" "*.so") each time it opens a device; on
 * Debian the compiled-in folder is /usr/lib/x86_64-linux-gnu/libv4l/plugins
 * and the call goes through the PLT of the shared libv4l2.so.0 (checked on
 * Debian 12's libv4l-0 1.22.1: `nm -D` lists "U glob@GLIBC_2.27" and
 * `strings` the pattern "/usr/lib/x86_64-linux-gnu/libv4l/plugins/" "*.so";
 * each .so found is dlopen()ed and its libv4l2_plugin->init(fd) asked in
 * turn, the first non-NULL answer claiming the fd). A glob()
 * defined in the test program (exported with -rdynamic) or in a library
 * given in LD_PRELOAD comes first in the symbol lookup, so this one sees
 * the call: when the pattern ends in "/libv4l/plugins/" "*.so" and
 * MB_V4L2_PLUGIN_DIR is set, it searches "$MB_V4L2_PLUGIN_DIR/" "*.so"
 * instead; every other glob() goes to the C library unchanged.
 *
 * The alternative, a bind mount of the test folder over the system plugin
 * folder inside `unshare -m`, needs root; this way runs anywhere.
 */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <glob.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef int (*glob_fn)(const char *, int, int (*)(const char *, int), glob_t *);

static int is_plugin_pattern(const char *p)
{
    static const char tail[] = "/libv4l/plugins/*.so";
    size_t n = strlen(p), t = sizeof tail - 1;
    return n >= t && !strcmp(p + n - t, tail);
}

int glob(const char *pattern, int flags, int (*errfunc)(const char *, int),
         glob_t *pglob)
{
    static glob_fn real;
    if (!real) {
        void *sym = dlsym(RTLD_NEXT, "glob");
        if (!sym)
            return GLOB_ABORTED;
        memcpy(&real, &sym, sizeof real); /* object to function pointer */
    }
    const char *dir = getenv("MB_V4L2_PLUGIN_DIR");
    char redirected[4096];
    if (dir && *dir && pattern && is_plugin_pattern(pattern)) {
        snprintf(redirected, sizeof redirected, "%s/*.so", dir);
        pattern = redirected;
    }
    return real(pattern, flags, errfunc, pglob);
}
