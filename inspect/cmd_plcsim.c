/*
 * inspect/cmd_plcsim.c - `modeband plc-sim`: a small PLC of our own for
 * demos and tests. A libmodbus client that connects to a station in
 * server mode and, part after part, runs the handshake of io/plc_map.h:
 * set the trigger coil, wait for result valid with a new sequence number,
 * read the block, set the acknowledge coil, wait for result valid to
 * clear. One line per part, a summary with the trigger-to-result latency.
 */
#include "cli.h"
#include "commands.h"
#include "error.h"
#include "plc_map.h"

#include <errno.h>
#include <modbus/modbus.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static const char *const plcsim_help =
    "usage: modeband plc-sim --connect HOST:PORT --parts N [--period MS]\n"
    "                        [--timeout MS] [--unit ID] [--quiet]\n"
    "\n"
    "Act as the PLC of a station in server mode: for each of N parts set the\n"
    "trigger coil, wait for 'result valid' with a new sequence number, read\n"
    "the result block, acknowledge it and wait until the station clears it.\n"
    "Prints one line per part and a summary with the trigger-to-result\n"
    "latency (p50, p99, max).\n"
    "\n"
    "  --connect HOST:PORT  the station (IPv6 as [addr]:port)\n"
    "  --parts N            parts to run (1..1000000)\n"
    "  --period MS          pause between parts (default 0)\n"
    "  --timeout MS         longest wait for each step (default 2000)\n"
    "  --unit ID            Modbus unit id to send (default 255)\n"
    "  --quiet              summary only\n"
    "\n"
    "Exit status: 0 every part got a result (pass, reject or fault alike),\n"
    "1 failure (cannot connect, no answer, no result in time), 2 usage.\n";

static double now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec * 1e-6;
}

static void pause_ms(int ms)
{
    struct timespec ts = {ms / 1000, (long)(ms % 1000) * 1000000L};
    while (nanosleep(&ts, &ts) < 0 && errno == EINTR)
        ;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Split "host:port" / "[v6]:port". */
static int split_host(const char *s, char *host, size_t n, char *port, size_t pn)
{
    const char *colon = strrchr(s, ':');
    if (!colon || colon == s || !colon[1] || strlen(colon + 1) >= pn)
        return -1;
    const char *h = s;
    size_t hl = (size_t)(colon - s);
    if (s[0] == '[') {
        if (hl < 3 || s[hl - 1] != ']')
            return -1;
        h++;
        hl -= 2;
    }
    if (hl >= n)
        return -1;
    memcpy(host, h, hl);
    host[hl] = '\0';
    for (const char *p = colon + 1; *p; p++)
        if (*p < '0' || *p > '9')
            return -1;
    strcpy(port, colon + 1);
    return 0;
}

static const char *verdict_name(int v)
{
    switch (v) {
    case MB_PLC_PASS: return "pass";
    case MB_PLC_REJECT: return "reject";
    case MB_PLC_FAULT: return "fault";
    default: return "none";
    }
}

/* Read the block until done(block) or the deadline; 1 done, 0 timed
 * out, -1 link failure (message in err). */
static int wait_block(modbus_t *ctx, uint16_t *b, double deadline,
                      int (*done)(const uint16_t *, unsigned), unsigned arg,
                      char *err)
{
    for (;;) {
        if (modbus_read_registers(ctx, 0, MB_PLC_BLOCK_LEN, b) != MB_PLC_BLOCK_LEN) {
            snprintf(err, MB_ERR_LEN, "reading the block failed: %s",
                     modbus_strerror(errno));
            return -1;
        }
        if (done(b, arg))
            return 1;
        if (now_ms() > deadline)
            return 0;
    }
}

static int is_ready(const uint16_t *b, unsigned arg)
{
    (void)arg;
    return (b[MB_PLC_REG_STATUS] & MB_PLC_ST_READY) != 0;
}

static int has_result(const uint16_t *b, unsigned seq0)
{
    return (b[MB_PLC_REG_STATUS] & MB_PLC_ST_VALID) &&
           b[MB_PLC_REG_SEQUENCE] != (uint16_t)seq0;
}

static int is_cleared(const uint16_t *b, unsigned arg)
{
    (void)arg;
    return !(b[MB_PLC_REG_STATUS] & MB_PLC_ST_VALID);
}

static void print_part(int k, const uint16_t *b, double lat)
{
    printf("part %d: seq %u %s", k, b[MB_PLC_REG_SEQUENCE],
           verdict_name(b[MB_PLC_REG_VERDICT]));
    if (b[MB_PLC_REG_VERDICT] != MB_PLC_PASS)
        printf(" reason %u", b[MB_PLC_REG_REASON]);
    if (b[MB_PLC_REG_VERDICT] == MB_PLC_FAULT)
        printf(" fault %u", b[MB_PLC_REG_FAULT]);
    printf(", slot %u, cycle %.1f ms, latency %.2f ms, gauges", b[MB_PLC_REG_SLOT],
           b[MB_PLC_REG_CYCLE] / 10.0, lat);
    for (int i = 0; i < MB_PLC_N_GAUGES; i++) {
        uint16_t g = b[MB_PLC_REG_GAUGE0 + i];
        if (g == MB_PLC_GAUGE_NONE)
            printf(" -");
        else
            printf(" %+.2f", (int16_t)g / 100.0);
    }
    printf(" mm\n");
}

int mb_cmd_plcsim(int argc, char **argv)
{
    const char *connect_to = NULL;
    int parts = 0, period = 0, timeout = 2000, unit = 255, quiet = 0, help = 0;
    int n_pos = 0;
    char err[MB_ERR_LEN];
    const mb_opt opts[] = {
        {"connect", MB_OPT_STRING, &connect_to, NULL},
        {"parts", MB_OPT_INT, &parts, NULL},
        {"period", MB_OPT_INT, &period, NULL},
        {"timeout", MB_OPT_INT, &timeout, NULL},
        {"unit", MB_OPT_INT, &unit, NULL},
        {"quiet", MB_OPT_FLAG, &quiet, NULL},
    };
    if (mb_cli_parse(argc, argv, opts, sizeof opts / sizeof opts[0], NULL, 0,
                     &n_pos, &help, err) < 0)
        return mb_cli_usage_error("plc-sim", err);
    if (help) {
        fputs(plcsim_help, stdout);
        return MB_EXIT_OK;
    }
    char host[256], port[16];
    if (!connect_to || split_host(connect_to, host, sizeof host, port, sizeof port) < 0)
        return mb_cli_usage_error("plc-sim", "--connect HOST:PORT is required "
                                             "(e.g. --connect 127.0.0.1:1502)");
    if (parts < 1 || parts > 1000000)
        return mb_cli_usage_error("plc-sim", "--parts must be 1..1000000");
    if (period < 0 || period > 600000 || timeout < 1 || timeout > 600000)
        return mb_cli_usage_error("plc-sim", "--period must be 0..600000 and "
                                             "--timeout 1..600000 (ms)");
    if (!((unit >= 0 && unit <= 247) || unit == 255))
        return mb_cli_usage_error("plc-sim", "--unit must be 0..247 or 255");

    double *lat = malloc(sizeof *lat * (size_t)parts);
    modbus_t *ctx = modbus_new_tcp_pi(host, port);
    if (!lat || !ctx) {
        free(lat);
        if (ctx)
            modbus_free(ctx);
        return mb_cli_fail("plc-sim", "out of memory");
    }
    modbus_set_slave(ctx, unit);
    modbus_set_response_timeout(ctx, (uint32_t)(timeout / 1000),
                                (uint32_t)(timeout % 1000) * 1000u);
    int rc = MB_EXIT_OK, done = 0, count[4] = {0, 0, 0, 0}, gaps = 0;
    uint16_t b[MB_PLC_BLOCK_LEN];
    if (modbus_connect(ctx) < 0) {
        snprintf(err, sizeof err, "cannot connect to %s port %s: %s", host, port,
                 modbus_strerror(errno));
        rc = mb_cli_fail("plc-sim", err);
        goto out;
    }
    int w = wait_block(ctx, b, now_ms() + timeout, is_ready, 0, err);
    if (w <= 0) {
        if (w == 0)
            snprintf(err, sizeof err, "the station at %s port %s is not ready "
                     "(status bit 0) after %d ms", host, port, timeout);
        rc = mb_cli_fail("plc-sim", err);
        goto out;
    }
    for (int k = 1; k <= parts; k++) {
        unsigned seq0 = b[MB_PLC_REG_SEQUENCE];
        double t0 = now_ms();
        if (modbus_write_bit(ctx, MB_PLC_COIL_TRIGGER, 1) != 1) {
            snprintf(err, sizeof err, "part %d: writing the trigger failed: %s", k,
                     modbus_strerror(errno));
            rc = mb_cli_fail("plc-sim", err);
            goto out;
        }
        w = wait_block(ctx, b, t0 + timeout, has_result, seq0, err);
        if (w <= 0) {
            if (w == 0)
                snprintf(err, sizeof err, "part %d: no result within %d ms", k, timeout);
            rc = mb_cli_fail("plc-sim", err);
            goto out;
        }
        lat[done++] = now_ms() - t0;
        if (b[MB_PLC_REG_SEQUENCE] != (uint16_t)(seq0 + 1))
            gaps++;
        count[b[MB_PLC_REG_VERDICT] & 3]++;
        if (!quiet)
            print_part(k, b, lat[done - 1]);
        if (modbus_write_bit(ctx, MB_PLC_COIL_ACK, 1) != 1) {
            snprintf(err, sizeof err, "part %d: writing the acknowledge failed: %s",
                     k, modbus_strerror(errno));
            rc = mb_cli_fail("plc-sim", err);
            goto out;
        }
        w = wait_block(ctx, b, now_ms() + timeout, is_cleared, 0, err);
        if (w <= 0) {
            if (w == 0)
                snprintf(err, sizeof err, "part %d: result valid not cleared "
                         "within %d ms of the acknowledge", k, timeout);
            rc = mb_cli_fail("plc-sim", err);
            goto out;
        }
        if (period > 0 && k < parts)
            pause_ms(period);
    }
out:
    if (done > 0) {
        qsort(lat, (size_t)done, sizeof *lat, cmp_double);
        /* nearest-rank percentiles */
        int i50 = (done * 50 + 99) / 100 - 1, i99 = (done * 99 + 99) / 100 - 1;
        uint32_t sp = (uint32_t)b[MB_PLC_REG_PARTS_HI] << 16 | b[MB_PLC_REG_PARTS_LO];
        uint32_t sr = (uint32_t)b[MB_PLC_REG_REJECTS_HI] << 16 | b[MB_PLC_REG_REJECTS_LO];
        printf("plc-sim: %d of %d parts: %d pass, %d reject, %d fault; "
               "trigger to result p50 %.2f ms, p99 %.2f ms, max %.2f ms; "
               "station counts %u parts, %u rejects this shift",
               done, parts, count[MB_PLC_PASS], count[MB_PLC_REJECT],
               count[MB_PLC_FAULT], lat[i50 < 0 ? 0 : i50], lat[i99 < 0 ? 0 : i99],
               lat[done - 1], sp, sr);
        if (gaps)
            printf("; %d results skipped a sequence number", gaps);
        printf("\n");
    }
    modbus_close(ctx);
    modbus_free(ctx);
    free(lat);
    return rc;
}
