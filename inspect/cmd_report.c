/*
 * inspect/cmd_report.c - `modeband report`: the shift report from the shift
 * logs (inspect/report.h), on the terminal, as HTML and as CSV.
 */
#include "cli.h"
#include "commands.h"
#include "error.h"
#include "file_list.h"
#include "report.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char *const report_help =
    "usage: modeband report --logs DIR [--shift NAME --date YYYY-MM-DD]\n"
    "                       [--from TIME] [--to TIME] [--html FILE] [--csv FILE]\n"
    "                       [--title TEXT] [--quiet] [--threads N]\n"
    "\n"
    "Summarise the shift logs (DIR/<date>_<shift>.jsonl): parts, passes,\n"
    "rejects, faults and yield; a Pareto table of reasons; where located\n"
    "defects cluster; per gauge mean, sd, Cp and Cpk; rejects per hour;\n"
    "faults with their durations; drift warnings; model changes.\n"
    "\n"
    "  --logs DIR      folder of shift logs (required)\n"
    "  --shift NAME    only the logs of this shift (by file name)\n"
    "  --date D        only the shifts that started on this date\n"
    "  --from TIME     only records at or after this local time\n"
    "                  (YYYY-MM-DD[THH:MM[:SS]])\n"
    "  --to TIME       only records before this local time\n"
    "  --html FILE     also write one self-contained HTML page with charts\n"
    "  --csv FILE      also write one row per part\n"
    "  --title TEXT    title of the HTML page\n"
    "  --quiet         no terminal summary\n"
    "  --threads N     log files read at once, 1..8 (default 2; with --csv\n"
    "                  the files are read one after the other)\n"
    "\n"
    "Torn last lines, invalid lines and lines of a newer format version are\n"
    "skipped and said. Exit status: 0 done, 1 failure, 2 usage error.\n";

static int parse_local(const char *opt, const char *s, double *out, char *err)
{
    double u;
    if (mb_slog_parse_time(s, &u, out))
        return mb_err_set(err, -1,
                          "%s: expected a local time YYYY-MM-DD[THH:MM[:SS]], "
                          "found '%s'",
                          opt, s);
    return 0;
}

int mb_cmd_report(int argc, char **argv)
{
    const char *logs = NULL, *shift = NULL, *date = NULL, *from_s = NULL;
    const char *to_s = NULL, *html = NULL, *csv = NULL, *title = NULL;
    int quiet = 0, help = 0, npos = 0, threads = 2;
    const char *pos[1];
    char err[MB_ERR_LEN];
    const mb_opt opts[] = {
        {"logs", MB_OPT_STRING, &logs, NULL},
        {"shift", MB_OPT_STRING, &shift, NULL},
        {"date", MB_OPT_STRING, &date, NULL},
        {"from", MB_OPT_STRING, &from_s, NULL},
        {"to", MB_OPT_STRING, &to_s, NULL},
        {"html", MB_OPT_STRING, &html, NULL},
        {"csv", MB_OPT_STRING, &csv, NULL},
        {"title", MB_OPT_STRING, &title, NULL},
        {"quiet", MB_OPT_FLAG, &quiet, NULL},
        {"threads", MB_OPT_INT, &threads, NULL},
    };
    if (mb_cli_parse(argc, argv, opts, sizeof opts / sizeof opts[0], pos, 0,
                     &npos, &help, err) < 0)
        return mb_cli_usage_error("report", err);
    if (help) {
        fputs(report_help, stdout);
        return MB_EXIT_OK;
    }
    if (!logs)
        return mb_cli_usage_error("report", "--logs DIR is required");
    mb_report_filter filter = {shift, date, NAN, NAN};
    if (from_s && parse_local("--from", from_s, &filter.from, err))
        return mb_cli_usage_error("report", err);
    if (to_s && parse_local("--to", to_s, &filter.to, err))
        return mb_cli_usage_error("report", err);
    if (date) {
        double u, l;
        if (strlen(date) != 10 || mb_slog_parse_time(date, &u, &l))
            return mb_cli_usage_error("report",
                                      "--date: expected YYYY-MM-DD");
    }

    static const char *const exts[] = {".jsonl"};
    mb_file_list list = {0};
    if (mb_file_list_dir(logs, exts, 1, &list, err) < 0)
        return mb_cli_fail("report", err);
    mb_report *r = NULL;
    FILE *cf = NULL;
    int rc = MB_EXIT_OK;
    if (mb_report_open(&r)) {
        rc = mb_cli_fail("report", "out of memory");
        goto out;
    }
    if (csv) {
        cf = fopen(csv, "w");
        if (!cf) {
            snprintf(err, sizeof err, "%s: cannot write: %s", csv,
                     strerror(errno));
            rc = mb_cli_fail("report", err);
            goto out;
        }
        mb_report_set_csv(r, cf);
    }
    if (threads < 1 || threads > MB_REPORT_MAX_THREADS) {
        rc = mb_cli_usage_error("report", "--threads: expected 1..8");
        goto out;
    }
    if (mb_report_add_files(r, list.paths, list.count, &filter, threads, err) < 0) {
        rc = mb_cli_fail("report", err);
        goto out;
    }
    if (cf) {
        int bad = ferror(cf);
        bad |= fclose(cf) != 0;
        cf = NULL;
        if (bad) {
            snprintf(err, sizeof err, "%s: write failed", csv);
            rc = mb_cli_fail("report", err);
            goto out;
        }
    }
    if (!quiet)
        mb_report_print(r, stdout);
    if (html) {
        /* reject images are relative to the log folder's parent */
        char root[4096];
        snprintf(root, sizeof root, "%s/..", logs);
        char deftitle[256];
        snprintf(deftitle, sizeof deftitle, "Shift report%s%s%s%s",
                 date ? " " : "", date ? date : "", shift ? " " : "",
                 shift ? shift : "");
        if (mb_report_write_html(r, html, root, title ? title : deftitle, err)) {
            rc = mb_cli_fail("report", err);
            goto out;
        }
        if (!quiet)
            printf("\nHTML report: %s\n", html);
    }
    if (csv && !quiet)
        printf("CSV: %s\n", csv);
out:
    if (cf)
        fclose(cf);
    mb_report_close(r);
    mb_file_list_free(&list);
    return rc;
}
