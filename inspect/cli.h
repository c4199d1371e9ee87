/*
 * inspect/cli.h - the small option parser every subcommand uses.
 *
 * Options are long only: "--name VALUE", "--name=VALUE" or a bare "--flag".
 * Anything not starting with "--" is a positional argument. "--" ends the
 * options. Each subcommand declares its options in a table; unknown options,
 * missing values and malformed numbers are usage errors with a sentence.
 */
#ifndef MB_CLI_H
#define MB_CLI_H

#include <stddef.h>

typedef enum {
    MB_OPT_FLAG,   /**< no value; *(int *)dest = 1 */
    MB_OPT_STRING, /**< *(const char **)dest = value */
    MB_OPT_INT,    /**< *(int *)dest = value, checked integer */
    MB_OPT_DOUBLE  /**< *(double *)dest = value, checked finite number */
} mb_opt_kind;

typedef struct {
    const char *name; /**< without the leading "--" */
    mb_opt_kind kind;
    void *dest;
    int *seen;        /**< optional: set to 1 when given */
} mb_opt;

/**
 * Parse argv[1..argc-1] (argv[0] is the subcommand name). Positional
 * arguments are stored in order into pos (at most max_pos; their count in
 * *n_pos). "--help" sets *help and stops. On a usage error returns -1 and
 * writes a sentence into err (MB_ERR_LEN bytes).
 */
int mb_cli_parse(int argc, char **argv, const mb_opt *opts, size_t n_opts,
                 const char **pos, int max_pos, int *n_pos, int *help,
                 char *err);

/** Print "modeband CMD: <msg>" and the --help hint to stderr; returns 2. */
int mb_cli_usage_error(const char *cmd, const char *msg);

/** Print "modeband CMD: <msg>" to stderr; returns 1. */
int mb_cli_fail(const char *cmd, const char *msg);

#endif
