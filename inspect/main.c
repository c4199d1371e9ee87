/*
 * inspect/main.c - the `modeband` command-line front end: dispatch to the
 * subcommands in cmd_*.c.
 */
#include "commands.h"

#include <cblas.h>
#include <stdio.h>
#include <string.h>

typedef struct {
    const char *name;
    int (*run)(int argc, char **argv);
    const char *summary;
    /* 1: OpenBLAS may use every core. Only teaching has matrices big
       enough for that (the PCA of all the outlines); per frame they are
       a few hundred by a few, where worker threads only add hand-offs and
       spin on the cores the camera, PLC and inspection threads need. */
    int blas_threads;
} mb_command;

static const mb_command commands[] = {
    {"teach", mb_cmd_teach, "build a part model from good samples", 1},
    {"model-info", mb_cmd_model_info, "print the summary of a model file", 0},
    {"inspect", mb_cmd_inspect, "judge images against a taught model", 0},
    {"run", mb_cmd_run, "run the inspection station (camera, PLC, shift logs)", 0},
    {"synth", mb_cmd_synth, "write frames of the synthetic production line", 0},
    {"target", mb_cmd_target, "write the printable calibration target (SVG)", 0},
    {"calibrate", mb_cmd_calibrate, "calibrate px to mm on the conveyor plane", 0},
    {"repeatability", mb_cmd_repeatability, "repeatability study of the gauges (%GRR)", 0},
    {"plc-sim", mb_cmd_plcsim, "act as a PLC: trigger, read and acknowledge results", 0},
    {"report", mb_cmd_report, "summarise the shift logs (terminal, HTML, CSV)", 0},
};

static void usage(FILE *f)
{
    fprintf(f, "usage: modeband COMMAND [OPTIONS]\n\n"
               "modeband inspects flexible parts against a model taught from "
               "good samples.\n\ncommands:\n");
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        fprintf(f, "  %-14s %s\n", commands[i].name, commands[i].summary);
    fprintf(f, "\n'modeband COMMAND --help' describes each command.\n"
               "Exit status: 0 done, 1 failure, 2 usage error.\n"
               "modeband is a quality-inspection tool, not a safety device.\n");
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        usage(stderr);
        return MB_EXIT_USAGE;
    }
    if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h") ||
        !strcmp(argv[1], "help")) {
        usage(stdout);
        return MB_EXIT_OK;
    }
    if (!strcmp(argv[1], "--version")) {
        printf("modeband " MB_VERSION "\n");
        return MB_EXIT_OK;
    }
    for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
        if (!strcmp(argv[1], commands[i].name)) {
            if (!commands[i].blas_threads)
                openblas_set_num_threads(1);
            return commands[i].run(argc - 1, argv + 1);
        }
    fprintf(stderr, "modeband: unknown command '%s'; 'modeband --help' lists the commands.\n",
            argv[1]);
    return MB_EXIT_USAGE;
}
