/*
 * io/plc.c - the PLC link handle: configuration, the station-facing state
 * API (which drives the handshake in plc_map.c) and the dispatch to the
 * transport (plc_server.c or plc_client.c). Also the allow-list parser.
 */
#include "plc_internal.h"

#include "error.h"

#include <arpa/inet.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <netinet/in.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

void mb_plc_config_default(mb_plc_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
    cfg->mode = MB_PLC_SERVER;
    snprintf(cfg->bind_addr, sizeof cfg->bind_addr, "127.0.0.1");
    cfg->port = 502;
    cfg->max_connections = 4;
    cfg->frame_timeout_ms = 1000;
    cfg->idle_timeout_ms = 0;
    cfg->peer_port = 502;
    cfg->unit_id = 255;
    cfg->block_addr = 0;
    cfg->trigger_kind = MB_PLC_ON_COIL;
    cfg->trigger_addr = 0;
    cfg->ack_addr = -1;
    cfg->slot_addr = -1;
    cfg->poll_ms = 10;
    cfg->timeout_ms = 100;
    cfg->backoff_min_ms = 100;
    cfg->backoff_max_ms = 5000;
    cfg->heartbeat_ms = 100;
    cfg->active_slot = 0;
}

/* ---- allow-list entries ---- */

int mb_plc_net_parse(const char *s, int *family, uint8_t addr[16], int *prefix)
{
    char host[MB_PLC_ADDR_LEN];
    if (!s || !family || !addr || !prefix)
        return MB_EINVAL;
    size_t n = strlen(s);
    if (n == 0 || n >= sizeof host)
        return MB_EINVAL;
    memcpy(host, s, n + 1);
    char *slash = strchr(host, '/');
    const char *bits = NULL;
    if (slash) {
        *slash = '\0';
        bits = slash + 1;
    }
    memset(addr, 0, 16);
    int max;
    if (inet_pton(AF_INET, host, addr) == 1) {
        *family = 4;
        max = 32;
    } else if (inet_pton(AF_INET6, host, addr) == 1) {
        *family = 6;
        max = 128;
    } else {
        return MB_EINVAL;
    }
    *prefix = max;
    if (bits) {
        if (!*bits || strlen(bits) > 3)
            return MB_EINVAL;
        int v = 0;
        for (const char *p = bits; *p; p++) {
            if (*p < '0' || *p > '9')
                return MB_EINVAL;
            v = v * 10 + (*p - '0');
        }
        if (v > max)
            return MB_EINVAL;
        *prefix = v;
    }
    return MB_OK;
}

int mb_plc_net_match(int family, const uint8_t addr[16], int net_family,
                     const uint8_t net[16], int prefix)
{
    static const uint8_t mapped[12] = {0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0xff, 0xff};
    uint8_t a[16];
    memcpy(a, addr, 16);
    if (family == 6 && memcmp(a, mapped, 12) == 0) {
        /* an IPv4 client of a dual-stack listener */
        memmove(a, a + 12, 4);
        memset(a + 4, 0, 12);
        family = 4;
    }
    if (family != net_family)
        return 0;
    int full = prefix / 8, rest = prefix % 8;
    if (memcmp(a, net, (size_t)full) != 0)
        return 0;
    if (rest) {
        uint8_t mask = (uint8_t)(0xFFu << (8 - rest));
        if ((a[full] & mask) != (net[full] & mask))
            return 0;
    }
    return 1;
}

/* ---- configuration ---- */

static int range(char *err, const char *field, int v, int lo, int hi)
{
    if (v < lo || v > hi)
        return mb_err_set(err, MB_ERANGE,
                          "plc.%s: %d is out of range; expected %d..%d",
                          field, v, lo, hi);
    return MB_OK;
}

static int text_ok(char *err, const char *field, const char *s, size_t cap)
{
    if (!memchr(s, '\0', cap))
        return mb_err_set(err, MB_EINVAL, "plc.%s: text is not terminated",
                          field);
    if (!s[0])
        return mb_err_set(err, MB_EINVAL, "plc.%s: is empty; expected an address",
                          field);
    return MB_OK;
}

int mb_plc_config_check(const mb_plc_config *c, char *err)
{
    int rc;
    if (!c)
        return mb_err_set(err, MB_EINVAL, "plc: no configuration given");
    if (c->mode != MB_PLC_SERVER && c->mode != MB_PLC_CLIENT)
        return mb_err_set(err, MB_EINVAL,
                          "plc.mode: %d is not server (0) or client (1)",
                          (int)c->mode);
    if ((rc = range(err, "heartbeat_ms", c->heartbeat_ms, 10, 60000)) ||
        (rc = range(err, "active_slot", c->active_slot, 0, 65535)))
        return rc;
    if (c->mode == MB_PLC_SERVER) {
        uint8_t a[16];
        if ((rc = text_ok(err, "bind_addr", c->bind_addr, sizeof c->bind_addr)))
            return rc;
        if (inet_pton(AF_INET, c->bind_addr, a) != 1 &&
            inet_pton(AF_INET6, c->bind_addr, a) != 1)
            return mb_err_set(err, MB_EINVAL,
                              "plc.bind_addr: '%s' is not a numeric IPv4 or "
                              "IPv6 address (e.g. 127.0.0.1, 192.168.0.10, ::)",
                              c->bind_addr);
        if ((rc = range(err, "port", c->port, 0, 65535)) ||
            (rc = range(err, "max_connections", c->max_connections, 1,
                        MB_PLC_MAX_CONN)) ||
            (rc = range(err, "n_allow", c->n_allow, 0, MB_PLC_MAX_ALLOW)) ||
            (rc = range(err, "frame_timeout_ms", c->frame_timeout_ms, 10,
                        60000)) ||
            (rc = range(err, "idle_timeout_ms", c->idle_timeout_ms, 0,
                        INT_MAX / 2)))
            return rc;
        for (int i = 0; i < c->n_allow; i++) {
            int fam, pre;
            uint8_t net[16];
            if (!memchr(c->allow[i], '\0', sizeof c->allow[i]) ||
                mb_plc_net_parse(c->allow[i], &fam, net, &pre) < 0)
                return mb_err_set(err, MB_EINVAL,
                                  "plc.allow[%d]: '%.*s' is not an IPv4/IPv6 "
                                  "address with an optional /prefix",
                                  i, MB_PLC_ADDR_LEN - 1, c->allow[i]);
        }
        return MB_OK;
    }
    if ((rc = text_ok(err, "peer_addr", c->peer_addr, sizeof c->peer_addr)) ||
        (rc = range(err, "peer_port", c->peer_port, 1, 65535)) ||
        (rc = range(err, "block_addr", c->block_addr, 0,
                    65536 - MB_PLC_BLOCK_LEN)) ||
        (rc = range(err, "trigger_addr", c->trigger_addr, 0, 65535)) ||
        (rc = range(err, "ack_addr", c->ack_addr, -1, 65535)) ||
        (rc = range(err, "slot_addr", c->slot_addr, -1, 65535)) ||
        (rc = range(err, "poll_ms", c->poll_ms, 1, 10000)) ||
        (rc = range(err, "timeout_ms", c->timeout_ms, 1, 10000)) ||
        (rc = range(err, "backoff_min_ms", c->backoff_min_ms, 1, 60000)) ||
        (rc = range(err, "backoff_max_ms", c->backoff_max_ms,
                    c->backoff_min_ms, 600000)))
        return rc;
    if (!(c->unit_id >= 0 && c->unit_id <= 247) && c->unit_id != 255)
        return mb_err_set(err, MB_ERANGE,
                          "plc.unit_id: %d is out of range; expected 0..247 or 255",
                          c->unit_id);
    if (c->trigger_kind != MB_PLC_ON_COIL && c->trigger_kind != MB_PLC_ON_REGISTER)
        return mb_err_set(err, MB_EINVAL,
                          "plc.trigger_kind: %d is not coil (0) or register (1)",
                          (int)c->trigger_kind);
    return MB_OK;
}

/* ---- helpers shared by the transports ---- */

void mb_plc_log(const mb_plc *plc, int priority, const char *fmt, ...)
{
    if (!plc->cfg.log)
        return;
    char msg[MB_ERR_LEN];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    plc->cfg.log(plc->cfg.log_user, priority, msg);
}

int64_t mb_plc_now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

int mb_plc_until(int64_t now_ms, int64_t t)
{
    int64_t d = t - now_ms;
    if (d < 0)
        return 0;
    return d > INT_MAX ? INT_MAX : (int)d;
}

int mb_plc_tick(mb_plc *plc, int64_t now_ms)
{
    if (now_ms < plc->next_heartbeat)
        return 0;
    mb_plc_map_heartbeat(&plc->map);
    plc->next_heartbeat += plc->cfg.heartbeat_ms;
    /* After a stall the heartbeat resumes its rhythm from now rather than
     * racing to catch up: it shows the station's liveness, not a clock. */
    if (plc->next_heartbeat <= now_ms)
        plc->next_heartbeat = now_ms + plc->cfg.heartbeat_ms;
    return 1;
}

int mb_plc_fd_setup(int fd)
{
    int fl = fcntl(fd, F_GETFL);
    if (fl < 0 || fcntl(fd, F_SETFL, fl | O_NONBLOCK) < 0)
        return -1;
    int fd_fl = fcntl(fd, F_GETFD);
    if (fd_fl < 0 || fcntl(fd, F_SETFD, fd_fl | FD_CLOEXEC) < 0)
        return -1;
    return 0;
}

void mb_plc_addr_text(const struct sockaddr *sa, char *out, size_t n)
{
    char host[INET6_ADDRSTRLEN] = "?";
    int port = 0;
    if (sa->sa_family == AF_INET) {
        const struct sockaddr_in *s4 = (const struct sockaddr_in *)(const void *)sa;
        inet_ntop(AF_INET, &s4->sin_addr, host, sizeof host);
        port = ntohs(s4->sin_port);
        snprintf(out, n, "%s:%d", host, port);
    } else if (sa->sa_family == AF_INET6) {
        const struct sockaddr_in6 *s6 = (const struct sockaddr_in6 *)(const void *)sa;
        inet_ntop(AF_INET6, &s6->sin6_addr, host, sizeof host);
        port = ntohs(s6->sin6_port);
        snprintf(out, n, "[%s]:%d", host, port);
    } else {
        snprintf(out, n, "(unknown address family %d)", sa->sa_family);
    }
}

/* ---- handle ---- */

int mb_plc_open(const mb_plc_config *cfg, int64_t now_ms, mb_plc **out,
                char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "plc: no place for the handle");
    *out = NULL;
    int rc = mb_plc_config_check(cfg, err);
    if (rc < 0)
        return rc;
    mb_plc *plc = calloc(1, sizeof *plc);
    if (!plc)
        return mb_err_set(err, MB_ENOMEM, "plc: out of memory");
    plc->cfg = *cfg;
    plc->listen_fd = -1;
    plc->fd = -1;
    for (int i = 0; i < MB_PLC_MAX_CONN; i++)
        plc->conn[i].fd = -1;
    plc->last_now = now_ms;
    plc->be = cfg->mode == MB_PLC_SERVER ? &mb_plc_server_backend
                                         : &mb_plc_client_backend;
    mb_plc_map_init(&plc->map, cfg->active_slot);
    plc->next_heartbeat = now_ms + cfg->heartbeat_ms;
    for (int i = 0; i < cfg->n_allow; i++) {
        mb_plc_net *n = &plc->allow[i];
        if (mb_plc_net_parse(cfg->allow[i], &n->family, n->addr, &n->prefix) < 0) {
            rc = mb_err_set(err, MB_EINVAL, "plc.allow[%d]: not an address", i);
            goto fail;
        }
    }
    plc->n_allow = cfg->n_allow;
    rc = plc->be->open(plc, err);
    if (rc < 0)
        goto fail;
    *out = plc;
    return MB_OK;
fail:
    mb_plc_close(plc);
    return rc;
}

void mb_plc_close(mb_plc *plc)
{
    if (!plc)
        return;
    if (plc->be)
        plc->be->close(plc);
    free(plc);
}

int mb_plc_pollfds(const mb_plc *plc, struct pollfd *fds, int max)
{
    if (!plc || !fds || max <= 0)
        return 0;
    return plc->be->pollfds(plc, fds, max);
}

int mb_plc_timeout_ms(const mb_plc *plc, int64_t now_ms)
{
    if (!plc)
        return INT_MAX;
    int t = mb_plc_until(now_ms, plc->next_heartbeat);
    int u = plc->be->timeout(plc, now_ms);
    return u < t ? u : t;
}

int mb_plc_service(mb_plc *plc, int64_t now_ms)
{
    if (!plc)
        return MB_EINVAL;
    plc->be->service(plc, now_ms);
    return MB_OK;
}

int mb_plc_take_trigger(mb_plc *plc)
{
    if (!plc || !mb_plc_map_take_trigger(&plc->map))
        return 0;
    if (plc->cfg.mode == MB_PLC_CLIENT)
        plc->clear_trigger = 1;
    plc->be->changed(plc, 0);
    return 1;
}

int mb_plc_publish(mb_plc *plc, const mb_plc_result *r)
{
    if (!plc)
        return MB_EINVAL;
    int rc = mb_plc_map_publish(&plc->map, r);
    plc->be->changed(plc, 1);
    return rc;
}

int mb_plc_publish_fault(mb_plc *plc, int fault_code, int reason,
                         double cycle_ms)
{
    if (!plc)
        return MB_EINVAL;
    mb_plc_result r;
    memset(&r, 0, sizeof r);
    r.verdict = MB_PLC_FAULT;
    r.fault_code = fault_code;
    r.reason = reason;
    r.cycle_ms = cycle_ms;
    return mb_plc_publish(plc, &r);
}

int mb_plc_set_status(mb_plc *plc, unsigned bits, int on)
{
    if (!plc)
        return MB_EINVAL;
    int rc = mb_plc_map_set_status(&plc->map, bits, on);
    if (rc == MB_OK)
        plc->be->changed(plc, 0);
    return rc;
}

void mb_plc_set_fault(mb_plc *plc, int fault_code)
{
    if (!plc)
        return;
    mb_plc_map_set_fault(&plc->map, fault_code);
    plc->be->changed(plc, 0);
}

void mb_plc_set_active_slot(mb_plc *plc, int slot)
{
    if (!plc)
        return;
    mb_plc_map_set_slot(&plc->map, slot);
    plc->be->changed(plc, 0);
}

void mb_plc_set_counters(mb_plc *plc, uint32_t parts, uint32_t rejects)
{
    if (!plc)
        return;
    mb_plc_map_set_counters(&plc->map, parts, rejects);
    plc->be->changed(plc, 0);
}

int mb_plc_take_slot_request(mb_plc *plc, int *slot)
{
    if (!plc || !plc->map.slot_pending)
        return 0;
    plc->map.slot_pending = 0;
    if (slot)
        *slot = plc->map.req_slot;
    return 1;
}

int mb_plc_take_counter_reset(mb_plc *plc)
{
    if (!plc || !plc->map.reset_pending)
        return 0;
    plc->map.reset_pending = 0;
    return 1;
}

void mb_plc_get_map(const mb_plc *plc, mb_plc_map *out)
{
    if (!out)
        return;
    if (!plc)
        memset(out, 0, sizeof *out);
    else
        *out = plc->map;
}

void mb_plc_get_stats(const mb_plc *plc, mb_plc_stats *out)
{
    if (!out)
        return;
    if (!plc)
        memset(out, 0, sizeof *out);
    else
        *out = plc->stats;
}

int mb_plc_port(const mb_plc *plc)
{
    if (!plc)
        return 0;
    return plc->cfg.mode == MB_PLC_SERVER ? plc->port : plc->cfg.peer_port;
}

int mb_plc_connected(const mb_plc *plc)
{
    return plc ? plc->stats.connections : 0;
}
