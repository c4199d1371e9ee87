/*
 * tests/io/plc_station.c - a test station: the PLC link (io/plc.h) in
 * server or client mode around a fake inspection (plc_fake.h), in one poll
 * loop. Tests start it by pid and wait for its readiness line on stdout:
 *     READY port=N            (server: the real port, also when 0 was asked)
 *     READY mode=client port=N
 * then read event lines (RESULT ..., SLOT n, RESET, LOG <prio> <sentence>)
 * and stop it with SIGTERM (the handler only sets a flag); it then prints
 *     STATS key=value ...
 * and exits 0. Exit 1 when the link cannot be opened, 2 on a usage error.
 *
 * usage: plc_station [--mode server|client] [--bind ADDR] [--port N]
 *          [--max-conn N] [--allow A[,B...]] [--frame-timeout MS]
 *          [--idle-timeout MS] [--peer HOST:PORT] [--unit N] [--block N]
 *          [--trigger-coil N | --trigger-reg N] [--ack N] [--slot-reg N]
 *          [--poll-ms MS] [--timeout-ms MS] [--backoff-min MS]
 *          [--backoff-max MS] [--heartbeat-ms MS] [--slot N]
 *          [--reject-every N] [--fault-at N] [--inspect-ms MS]
 */
#include "plc.h"
#include "plc_fake.h"

#include "error.h"

#include <getopt.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static volatile sig_atomic_t stop_flag;

static void on_signal(int sig)
{
    (void)sig;
    stop_flag = 1;
}

static int should_stop(void *user)
{
    (void)user;
    return stop_flag != 0;
}

static void log_line(void *user, int priority, const char *msg)
{
    (void)user;
    printf("LOG %d %s\n", priority, msg);
    fflush(stdout);
}

static int number(const char *s, int *out)
{
    char *end;
    long v = strtol(s, &end, 10);
    if (!*s || *end || v < -1 || v > 1000000)
        return -1;
    *out = (int)v;
    return 0;
}

/* "host:port" or "[v6]:port" */
static int host_port(const char *s, mb_plc_config *cfg)
{
    const char *colon = strrchr(s, ':');
    if (!colon || colon == s)
        return -1;
    size_t hl = (size_t)(colon - s);
    const char *h = s;
    if (s[0] == '[' && hl >= 2 && s[hl - 1] == ']') {
        h = s + 1;
        hl -= 2;
    }
    if (hl == 0 || hl >= sizeof cfg->peer_addr)
        return -1;
    memcpy(cfg->peer_addr, h, hl);
    cfg->peer_addr[hl] = '\0';
    return number(colon + 1, &cfg->peer_port);
}

static int allow_list(const char *s, mb_plc_config *cfg)
{
    char buf[MB_PLC_MAX_ALLOW * MB_PLC_ADDR_LEN];
    if (strlen(s) >= sizeof buf)
        return -1;
    strcpy(buf, s);
    cfg->n_allow = 0;
    for (char *save = NULL, *t = strtok_r(buf, ",", &save); t;
         t = strtok_r(NULL, ",", &save)) {
        if (cfg->n_allow == MB_PLC_MAX_ALLOW || strlen(t) >= MB_PLC_ADDR_LEN)
            return -1;
        strcpy(cfg->allow[cfg->n_allow++], t);
    }
    return 0;
}

int main(int argc, char **argv)
{
    mb_plc_config cfg;
    mb_plc_config_default(&cfg);
    cfg.port = 0;
    cfg.log = log_line;
    plcfake_opts fo = {.reject_every = 5, .fault_at = 0, .inspect_ms = 0};
    static const struct option opts[] = {
        {"mode", required_argument, 0, 'm'},
        {"bind", required_argument, 0, 'b'},
        {"port", required_argument, 0, 'p'},
        {"max-conn", required_argument, 0, 'c'},
        {"allow", required_argument, 0, 'a'},
        {"frame-timeout", required_argument, 0, 'F'},
        {"idle-timeout", required_argument, 0, 'I'},
        {"peer", required_argument, 0, 'P'},
        {"unit", required_argument, 0, 'u'},
        {"block", required_argument, 0, 'B'},
        {"trigger-coil", required_argument, 0, 't'},
        {"trigger-reg", required_argument, 0, 'T'},
        {"ack", required_argument, 0, 'k'},
        {"slot-reg", required_argument, 0, 'S'},
        {"poll-ms", required_argument, 0, 'o'},
        {"timeout-ms", required_argument, 0, 'w'},
        {"backoff-min", required_argument, 0, 'n'},
        {"backoff-max", required_argument, 0, 'x'},
        {"heartbeat-ms", required_argument, 0, 'h'},
        {"slot", required_argument, 0, 's'},
        {"reject-every", required_argument, 0, 'r'},
        {"fault-at", required_argument, 0, 'f'},
        {"inspect-ms", required_argument, 0, 'i'},
        {0, 0, 0, 0},
    };
    int c, bad = 0;
    while ((c = getopt_long(argc, argv, "", opts, NULL)) != -1) {
        int *dst = NULL;
        switch (c) {
        case 'm':
            if (!strcmp(optarg, "server"))
                cfg.mode = MB_PLC_SERVER;
            else if (!strcmp(optarg, "client"))
                cfg.mode = MB_PLC_CLIENT;
            else
                bad = 1;
            break;
        case 'b':
            if (strlen(optarg) >= sizeof cfg.bind_addr)
                bad = 1;
            else
                strcpy(cfg.bind_addr, optarg);
            break;
        case 'a': bad |= allow_list(optarg, &cfg) < 0; break;
        case 'P': bad |= host_port(optarg, &cfg) < 0; break;
        case 't':
            cfg.trigger_kind = MB_PLC_ON_COIL;
            dst = &cfg.trigger_addr;
            break;
        case 'T':
            cfg.trigger_kind = MB_PLC_ON_REGISTER;
            dst = &cfg.trigger_addr;
            break;
        case 'p': dst = &cfg.port; break;
        case 'c': dst = &cfg.max_connections; break;
        case 'F': dst = &cfg.frame_timeout_ms; break;
        case 'I': dst = &cfg.idle_timeout_ms; break;
        case 'u': dst = &cfg.unit_id; break;
        case 'B': dst = &cfg.block_addr; break;
        case 'k': dst = &cfg.ack_addr; break;
        case 'S': dst = &cfg.slot_addr; break;
        case 'o': dst = &cfg.poll_ms; break;
        case 'w': dst = &cfg.timeout_ms; break;
        case 'n': dst = &cfg.backoff_min_ms; break;
        case 'x': dst = &cfg.backoff_max_ms; break;
        case 'h': dst = &cfg.heartbeat_ms; break;
        case 's': dst = &cfg.active_slot; break;
        case 'r': dst = &fo.reject_every; break;
        case 'f': dst = &fo.fault_at; break;
        case 'i': dst = &fo.inspect_ms; break;
        default: bad = 1;
        }
        if (dst && number(optarg, dst) < 0)
            bad = 1;
    }
    if (bad || optind != argc) {
        fprintf(stderr, "plc_station: bad arguments (see the header of plc_station.c)\n");
        return 2;
    }
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    sigaction(SIGTERM, &sa, NULL);
    sigaction(SIGINT, &sa, NULL);
    signal(SIGPIPE, SIG_IGN);

    char err[MB_ERR_LEN];
    mb_plc *plc = NULL;
    if (mb_plc_open(&cfg, mb_plc_now_ms(), &plc, err) < 0) {
        fprintf(stderr, "plc_station: %s\n", err);
        return 1;
    }
    mb_plc_set_status(plc, MB_PLC_ST_READY, 1);
    if (cfg.mode == MB_PLC_SERVER)
        printf("READY port=%d\n", mb_plc_port(plc));
    else
        printf("READY mode=client port=%d\n", mb_plc_port(plc));
    fflush(stdout);
    int parts = plcfake_run(plc, &fo, should_stop, NULL, stdout);
    mb_plc_stats st;
    mb_plc_get_stats(plc, &st);
    printf("STATS parts=%d accepted=%llu refused_full=%llu refused_allow=%llu "
           "dropped_framing=%llu dropped_timeout=%llu dropped_error=%llu "
           "closed_by_peer=%llu requests=%llu exceptions=%llu connects=%llu "
           "connect_failures=%llu link_failures=%llu block_writes=%llu "
           "plc_exceptions=%llu unsent_results=%llu\n",
           parts, (unsigned long long)st.accepted,
           (unsigned long long)st.refused_full,
           (unsigned long long)st.refused_allow,
           (unsigned long long)st.dropped_framing,
           (unsigned long long)st.dropped_timeout,
           (unsigned long long)st.dropped_error,
           (unsigned long long)st.closed_by_peer,
           (unsigned long long)st.requests, (unsigned long long)st.exceptions,
           (unsigned long long)st.connects,
           (unsigned long long)st.connect_failures,
           (unsigned long long)st.link_failures,
           (unsigned long long)st.block_writes,
           (unsigned long long)st.plc_exceptions,
           (unsigned long long)st.unsent_results);
    fflush(stdout);
    mb_plc_close(plc);
    return 0;
}
