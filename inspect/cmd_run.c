/*
 * inspect/cmd_run.c - `modeband run`: the station in the foreground (as
 * systemd runs it), logging to stderr with sd-daemon priority prefixes.
 */
#include "cli.h"
#include "commands.h"
#include "error.h"
#include "station.h"

#include <stdio.h>
#include <stdlib.h>

static const char *const run_help =
    "usage: modeband run --config STATION.json [--parts N]\n"
    "\n"
    "Run the inspection station: read frames from the camera (or a replay or\n"
    "the synthetic line), inspect every part, report to the PLC over Modbus\n"
    "TCP, log every part per shift and save reject images. Runs until\n"
    "SIGTERM or SIGINT (finishes the part in progress, flushes the logs, exit\n"
    "0); SIGHUP reloads the configuration and the models (a bad one is\n"
    "refused and the running one stays). Under systemd (Type=notify) it\n"
    "reports READY=1, WATCHDOG=1 and STATUS= lines.\n"
    "\n"
    "  --config FILE   station configuration (see systemd/station.example.json)\n"
    "  --parts N       stop after N parts (demo and tests)\n"
    "\n"
    "modeband is a quality-inspection tool, NOT a safety device: its outputs\n"
    "must never serve as a safety function; reject gates are interlocked under\n"
    "the plant's own procedures, local codes and qualified people.\n"
    "Exit status: 0 clean stop, 1 failure (bad configuration, port in use...),\n"
    "2 usage error.\n";

int mb_cmd_run(int argc, char **argv)
{
    const char *config = NULL;
    int parts = 0, help = 0, npos = 0;
    const char *pos[1];
    char err[MB_ERR_LEN];
    const mb_opt opts[] = {
        {"config", MB_OPT_STRING, &config, NULL},
        {"parts", MB_OPT_INT, &parts, NULL},
    };
    if (mb_cli_parse(argc, argv, opts, 2, pos, 0, &npos, &help, err) < 0)
        return mb_cli_usage_error("run", err);
    if (help) {
        fputs(run_help, stdout);
        return MB_EXIT_OK;
    }
    if (!config)
        return mb_cli_usage_error("run", "--config FILE is required");
    if (parts < 0)
        return mb_cli_usage_error("run", "--parts must not be negative");
    mb_station *st = NULL;
    if (mb_station_open(config, (uint64_t)parts, &st, err) < 0)
        return mb_cli_fail("run", err);
    int rc = mb_station_run(st);
    char sum[256];
    mb_station_summary(st, sum, sizeof sum);
    fprintf(stderr, "<6>station stopped: %s; log %s\n", sum, mb_station_log_path(st));
    mb_station_close(st);
    return rc == 0 ? MB_EXIT_OK : MB_EXIT_FAIL;
}
