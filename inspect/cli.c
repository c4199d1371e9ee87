/* inspect/cli.c - long-option parsing shared by the subcommands. */
#include "cli.h"

#include "commands.h"
#include "error.h"

#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int set_value(const mb_opt *o, const char *val, char *err)
{
    char *end = NULL;
    switch (o->kind) {
    case MB_OPT_STRING:
        *(const char **)o->dest = val;
        return 0;
    case MB_OPT_INT: {
        errno = 0;
        long v = strtol(val, &end, 10);
        if (errno || end == val || *end || v < INT_MIN || v > INT_MAX)
            return mb_err_set(err, -1, "--%s expects a whole number, got '%s'",
                              o->name, val);
        *(int *)o->dest = (int)v;
        return 0;
    }
    case MB_OPT_DOUBLE: {
        errno = 0;
        double v = strtod(val, &end);
        if (errno || end == val || *end || !isfinite(v))
            return mb_err_set(err, -1, "--%s expects a number, got '%s'",
                              o->name, val);
        *(double *)o->dest = v;
        return 0;
    }
    case MB_OPT_FLAG:
        break;
    }
    return mb_err_set(err, -1, "--%s takes no value", o->name);
}

int mb_cli_parse(int argc, char **argv, const mb_opt *opts, size_t n_opts,
                 const char **pos, int max_pos, int *n_pos, int *help,
                 char *err)
{
    int np = 0, only_pos = 0;
    *help = 0;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (only_pos || strncmp(a, "--", 2) != 0 || !strcmp(a, "-")) {
            if (np >= max_pos)
                return mb_err_set(err, -1, "unexpected argument '%s'", a);
            pos[np++] = a;
            continue;
        }
        if (!strcmp(a, "--")) {
            only_pos = 1;
            continue;
        }
        if (!strcmp(a, "--help")) {
            *help = 1;
            return 0;
        }
        const char *name = a + 2;
        const char *eq = strchr(name, '=');
        size_t len = eq ? (size_t)(eq - name) : strlen(name);
        const mb_opt *o = NULL;
        for (size_t k = 0; k < n_opts; k++)
            if (strlen(opts[k].name) == len && !strncmp(opts[k].name, name, len))
                o = &opts[k];
        if (!o)
            return mb_err_set(err, -1, "unknown option '%.*s'", (int)(len + 2), a);
        if (o->kind == MB_OPT_FLAG) {
            if (eq)
                return mb_err_set(err, -1, "--%s takes no value", o->name);
            *(int *)o->dest = 1;
        } else {
            const char *val = eq ? eq + 1 : NULL;
            if (!val) {
                if (i + 1 >= argc)
                    return mb_err_set(err, -1, "--%s needs a value", o->name);
                val = argv[++i];
            }
            if (set_value(o, val, err) < 0)
                return -1;
        }
        if (o->seen)
            *o->seen = 1;
    }
    if (n_pos)
        *n_pos = np;
    return 0;
}

int mb_cli_usage_error(const char *cmd, const char *msg)
{
    fprintf(stderr, "modeband %s: %s ('modeband %s --help' shows the usage)\n",
            cmd, msg, cmd);
    return MB_EXIT_USAGE;
}

int mb_cli_fail(const char *cmd, const char *msg)
{
    fprintf(stderr, "modeband %s: %s\n", cmd, msg);
    return MB_EXIT_FAIL;
}
