/*
 * inspect/station.h - the station: the loop that runs unattended on a line
 * PC. One poll loop serves the camera (or replay / synthetic line), the PLC
 * connections, the timers and the signals (signalfd: no work in handlers,
 * no global state). Per part: inspect, publish to the PLC, log, save the
 * reject image, update the drift charts.
 *
 * Fail-safe: a pass is only published for a converged fit that passed every
 * check (inspect/verdict.h); camera loss, a missing model, an inspection
 * over its time limit or an internal error publish a fault, which the PLC
 * treats as a reject.
 *
 * Signals: SIGTERM / SIGINT finish the part in progress, flush the logs and
 * return 0; SIGHUP reloads the configuration and the models and keeps the
 * PLC connections (a bad configuration keeps the old one running and says
 * why). Runs under systemd Type=notify: READY=1 once the camera and the PLC
 * link are up, WATCHDOG=1 from the loop, STATUS= with the counts.
 */
#ifndef MB_STATION_H
#define MB_STATION_H

#include <stddef.h>
#include <stdint.h>

typedef struct mb_station mb_station;

/** What a run did, for tests and the demo. */
typedef struct {
    uint64_t parts, passes, rejects, faults;
    uint64_t frames, camera_losses, reloads, reload_failures;
    uint64_t drift_signals;
    double cycle_ms_max;
} mb_station_stats;

/**
 * Load the configuration and every part model, open the camera, the PLC
 * link and the shift log. err gets a sentence naming the file and field.
 * max_parts > 0 stops the loop after that many parts (demo, tests).
 */
int mb_station_open(const char *config_path, uint64_t max_parts,
                    mb_station **out, char *err);

/** Run until SIGTERM/SIGINT (or max_parts). Returns 0 on a clean stop. */
int mb_station_run(mb_station *st);

void mb_station_get_stats(const mb_station *st, mb_station_stats *out);

/** Path of the current shift log file ("" if none). */
const char *mb_station_log_path(const mb_station *st);

/** The last shift summary line, or the running one. */
void mb_station_summary(const mb_station *st, char *buf, size_t len);

void mb_station_close(mb_station *st);

#endif
