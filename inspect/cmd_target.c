/*
 * inspect/cmd_target.c - `modeband target`: write the printable
 * calibration target (calibration/target.h) as an SVG sheet at true scale.
 */
#include "cli.h"
#include "commands.h"
#include "error.h"
#include "file_util.h"
#include "target.h"

#include <stdio.h>
#include <stdlib.h>

static const char *const target_help =
    "usage: modeband target --pitch MM --rows R --cols C --out FILE.svg\n"
    "\n"
    "Write modeband's calibration target as an SVG sheet at true scale: R\n"
    "rows of C dark dots, MM apart (dot diameter MM/2), with small marks in\n"
    "the cells that fix its orientation (three marked corner cells) and\n"
    "carry its pitch, so that `modeband calibrate` refuses a wrong --pitch.\n"
    "The sheet prints its parameters and a scale bar to check the print.\n"
    "Print it at 100 % (no scaling, no fit to page) on matt paper.\n"
    "\n"
    "  --pitch MM    dot spacing in mm, a multiple of 0.1 from 1.0 to 102.3\n"
    "  --rows R      rows of dots, 5 to 64\n"
    "  --cols C      dots per row, 5 to 64 (choose C != R: then even a\n"
    "                mirrored camera image reads the right way round)\n"
    "  --out FILE    the SVG file to write\n"
    "\n"
    "The whole target, with 1.5 pitch of white around it, must fit in the\n"
    "camera's view; dots should be at least 10 px apart in the image.\n"
    "Exit status: 0 done, 1 failure, 2 usage error.\n";

int mb_cmd_target(int argc, char **argv)
{
    const char *out = NULL;
    double pitch = 0.0;
    int rows = 0, cols = 0, help = 0, npos = 0;
    int seen_pitch = 0, seen_rows = 0, seen_cols = 0;
    char err[MB_ERR_LEN];
    const mb_opt opts[] = {
        {"pitch", MB_OPT_DOUBLE, &pitch, &seen_pitch},
        {"rows", MB_OPT_INT, &rows, &seen_rows},
        {"cols", MB_OPT_INT, &cols, &seen_cols},
        {"out", MB_OPT_STRING, &out, NULL},
    };
    if (mb_cli_parse(argc, argv, opts, sizeof opts / sizeof opts[0], NULL, 0,
                     &npos, &help, err) < 0)
        return mb_cli_usage_error("target", err);
    if (help) {
        fputs(target_help, stdout);
        return MB_EXIT_OK;
    }
    if (!seen_pitch || !seen_rows || !seen_cols || !out)
        return mb_cli_usage_error("target",
                                  "--pitch, --rows, --cols and --out are "
                                  "required");
    mb_target t;
    if (mb_target_init(rows, cols, pitch, &t, err) < 0)
        return mb_cli_usage_error("target", err);
    char *svg = NULL;
    size_t len = 0;
    if (mb_target_svg(&t, &svg, &len, err) < 0)
        return mb_cli_fail("target", err);
    int rc = mb_file_write_atomic(out, svg, len, err);
    free(svg);
    if (rc < 0)
        return mb_cli_fail("target", err);
    printf("wrote %s: %d x %d dots, pitch %.1f mm, dot diameter %.2f mm, "
           "grid %.1f x %.1f mm; print at 100 %%\n",
           out, t.rows, t.cols, t.pitch, t.dot_diameter, (t.cols - 1) * t.pitch,
           (t.rows - 1) * t.pitch);
    return MB_EXIT_OK;
}
