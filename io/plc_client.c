/*
 * io/plc_client.c - client mode: we write to the PLC over Modbus TCP.
 *
 * The connection is made without blocking (a non-blocking connect watched
 * by the station's poll loop) and handed to libmodbus with
 * modbus_set_socket; after that each request is one libmodbus round trip
 * (modbus_write_registers for the block, modbus_read_bits /
 * modbus_read_registers for trigger, acknowledge and slot, modbus_write_bit
 * / modbus_write_register to clear them), bounded by timeout_ms - the
 * only time the link can hold the loop. A lost link (timeout, reset,
 * close, unexpected bytes) closes the socket and retries after a delay
 * that doubles from backoff_min_ms up to backoff_max_ms and returns to the
 * minimum once connected. The block always holds the latest result, so
 * writing it on reconnect delivers the latest result; results published
 * while down are counted (stats.unsent_results).
 * An exception response from the PLC (e.g. a misconfigured address) is
 * counted and logged once per run of failures; the link stays up.
 */
#include "plc_internal.h"

#include "error.h"

#include <errno.h>
#include <limits.h>
#include <netdb.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include <modbus/modbus-tcp.h>

static int is_modbus_exception(int e)
{
    return e >= EMBXILFUN && e <= EMBXGTAR;
}

static void link_lost(mb_plc *plc, const char *why)
{
    if (plc->fd >= 0)
        close(plc->fd);
    plc->fd = -1;
    if (plc->ctx)
        modbus_set_socket(plc->ctx, -1);
    if (plc->link == MB_PLC_LINK_UP) {
        plc->stats.link_failures++;
        plc->stats.connections = 0;
        plc->backoff_ms = plc->cfg.backoff_min_ms;
        mb_plc_log(plc, MB_PLC_LOG_WARNING, "plc: link to %s port %d lost: %s",
                   plc->cfg.peer_addr, plc->cfg.peer_port, why);
    } else {
        plc->stats.connect_failures++;
        mb_plc_log(plc, MB_PLC_LOG_WARNING,
                   "plc: cannot connect to %s port %d: %s; next try in %d ms",
                   plc->cfg.peer_addr, plc->cfg.peer_port, why, plc->backoff_ms);
    }
    plc->link = MB_PLC_LINK_DOWN;
    plc->next_attempt = plc->last_now + plc->backoff_ms;
    plc->backoff_ms = plc->backoff_ms * 2 > plc->cfg.backoff_max_ms
                          ? plc->cfg.backoff_max_ms
                          : plc->backoff_ms * 2;
}

/* Request kinds, for logging a refusal once until that request works. */
enum { RQ_BLOCK = 1, RQ_TRIGGER = 2, RQ_ACK = 4, RQ_SLOT = 8 };

/* After a failed request: 0 when the PLC answered with an exception (the
 * link stays), -1 when the link was lost. */
static int request_failed(mb_plc *plc, const char *what, unsigned kind)
{
    int e = errno;
    if (is_modbus_exception(e)) {
        plc->stats.plc_exceptions++;
        if (!(plc->exc_logged & kind))
            mb_plc_log(plc, MB_PLC_LOG_ERR, "plc: the PLC refused %s: %s",
                       what, modbus_strerror(e));
        plc->exc_logged |= kind;
        return 0;
    }
    char why[160];
    snprintf(why, sizeof why, "%s failed: %s", what, modbus_strerror(e));
    link_lost(plc, why);
    return -1;
}

static int write_block(mb_plc *plc)
{
    if (modbus_write_registers(plc->ctx, plc->cfg.block_addr, MB_PLC_BLOCK_LEN,
                               plc->map.block) != MB_PLC_BLOCK_LEN)
        return request_failed(plc, "the block write", RQ_BLOCK) < 0 ? -1 : -2;
    plc->stats.block_writes++;
    plc->block_dirty = 0;
    plc->exc_logged &= ~(unsigned)RQ_BLOCK;
    return 0;
}

static int write_flag(mb_plc *plc, int addr, const char *what, unsigned kind)
{
    int rc = plc->cfg.trigger_kind == MB_PLC_ON_COIL
                 ? modbus_write_bit(plc->ctx, addr, 0)
                 : modbus_write_register(plc->ctx, addr, 0);
    if (rc != 1)
        return request_failed(plc, what, kind) < 0 ? -1 : -2;
    plc->exc_logged &= ~kind;
    return 0;
}

/* Read a trigger/acknowledge flag into *set. 0, -1 link lost, -2 refused. */
static int read_flag(mb_plc *plc, int addr, const char *what, unsigned kind,
                     int *set)
{
    int rc;
    if (plc->cfg.trigger_kind == MB_PLC_ON_COIL) {
        uint8_t b = 0;
        rc = modbus_read_bits(plc->ctx, addr, 1, &b);
        *set = b != 0;
    } else {
        uint16_t r = 0;
        rc = modbus_read_registers(plc->ctx, addr, 1, &r);
        *set = r != 0;
    }
    if (rc != 1)
        return request_failed(plc, what, kind) < 0 ? -1 : -2;
    plc->exc_logged &= ~kind;
    return 0;
}

static void link_up(mb_plc *plc, int64_t now_ms)
{
    plc->link = MB_PLC_LINK_UP;
    plc->stats.connects++;
    plc->stats.connections = 1;
    plc->backoff_ms = plc->cfg.backoff_min_ms;
    plc->exc_logged = 0;
    modbus_set_socket(plc->ctx, plc->fd);
    mb_plc_log(plc, MB_PLC_LOG_INFO, "plc: connected to %s port %d",
               plc->cfg.peer_addr, plc->cfg.peer_port);
    plc->next_poll = now_ms;
    /* A trigger taken while down is cleared first, then the latest block. */
    if (plc->clear_trigger) {
        if (write_flag(plc, plc->cfg.trigger_addr, "clearing the trigger", RQ_TRIGGER) == -1)
            return;
        plc->clear_trigger = 0;
    }
    write_block(plc);
}

static void start_connect(mb_plc *plc, int64_t now_ms)
{
    plc->last_now = now_ms;
    int fd = socket(plc->peer.ss_family, SOCK_STREAM | SOCK_NONBLOCK | SOCK_CLOEXEC, 0);
    if (fd < 0) {
        char why[96];
        snprintf(why, sizeof why, "socket: %s", strerror(errno));
        link_lost(plc, why);
        return;
    }
    int one = 1;
    setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof one);
    plc->fd = fd;
    if (connect(fd, (struct sockaddr *)&plc->peer, plc->peer_len) == 0) {
        link_up(plc, now_ms);
    } else if (errno == EINPROGRESS) {
        plc->link = MB_PLC_LINK_CONNECTING;
        plc->connect_deadline = now_ms + plc->cfg.timeout_ms;
    } else {
        link_lost(plc, strerror(errno));
    }
}

static int client_open(mb_plc *plc, char *err)
{
    char port[16];
    snprintf(port, sizeof port, "%d", plc->cfg.peer_port);
    struct addrinfo hints, *ai = NULL;
    memset(&hints, 0, sizeof hints);
    hints.ai_family = AF_UNSPEC;
    hints.ai_socktype = SOCK_STREAM;
    hints.ai_flags = AI_NUMERICSERV;
    int g = getaddrinfo(plc->cfg.peer_addr, port, &hints, &ai);
    if (g != 0 || !ai)
        return mb_err_set(err, MB_EIO, "plc.peer_addr: cannot resolve '%s': %s",
                          plc->cfg.peer_addr, gai_strerror(g));
    memcpy(&plc->peer, ai->ai_addr, ai->ai_addrlen);
    plc->peer_len = ai->ai_addrlen;
    freeaddrinfo(ai);
    plc->ctx = modbus_new_tcp_pi(plc->cfg.peer_addr, port);
    if (!plc->ctx)
        return mb_err_set(err, MB_ENOMEM, "plc: cannot create the Modbus context: %s",
                          modbus_strerror(errno));
    if (modbus_set_slave(plc->ctx, plc->cfg.unit_id) < 0)
        return mb_err_set(err, MB_ERANGE, "plc.unit_id: %d refused by libmodbus",
                          plc->cfg.unit_id);
    uint32_t s = (uint32_t)(plc->cfg.timeout_ms / 1000);
    uint32_t us = (uint32_t)(plc->cfg.timeout_ms % 1000) * 1000u;
    modbus_set_response_timeout(plc->ctx, s, us);
    modbus_set_byte_timeout(plc->ctx, s, us);
    plc->backoff_ms = plc->cfg.backoff_min_ms;
    plc->block_dirty = 1;
    plc->link = MB_PLC_LINK_DOWN;
    start_connect(plc, plc->last_now);
    return MB_OK;
}

static void client_close(mb_plc *plc)
{
    if (plc->fd >= 0)
        close(plc->fd);
    plc->fd = -1;
    plc->stats.connections = 0;
    if (plc->ctx) {
        modbus_set_socket(plc->ctx, -1);
        modbus_free(plc->ctx);
    }
    plc->ctx = NULL;
}

static int client_pollfds(const mb_plc *plc, struct pollfd *fds, int max)
{
    if (max < 1 || plc->fd < 0 || plc->link == MB_PLC_LINK_DOWN)
        return 0;
    fds[0].fd = plc->fd;
    fds[0].events = plc->link == MB_PLC_LINK_CONNECTING ? POLLOUT : POLLIN;
    fds[0].revents = 0;
    return 1;
}

static int client_timeout(const mb_plc *plc, int64_t now_ms)
{
    switch (plc->link) {
    case MB_PLC_LINK_DOWN: return mb_plc_until(now_ms, plc->next_attempt);
    case MB_PLC_LINK_CONNECTING: return mb_plc_until(now_ms, plc->connect_deadline);
    default: return plc->block_dirty ? 0 : mb_plc_until(now_ms, plc->next_poll);
    }
}

/* Read acknowledge, trigger and requested slot from the PLC. */
static void poll_plc(mb_plc *plc)
{
    int set = 0, rc;
    if (plc->cfg.ack_addr >= 0 && plc->map.state == MB_PLC_RESULT) {
        rc = read_flag(plc, plc->cfg.ack_addr, "reading the acknowledge", RQ_ACK, &set);
        if (rc == -1)
            return;
        if (rc == 0 && set) {
            plc->map.coil[MB_PLC_COIL_ACK] = 1;
            mb_plc_map_apply_writes(&plc->map, 0);
            plc->ack_clear = 1;
            plc->block_dirty = 1;
        }
    }
    if (plc->ack_clear) {
        rc = write_flag(plc, plc->cfg.ack_addr, "clearing the acknowledge", RQ_ACK);
        if (rc == -1)
            return;
        plc->ack_clear = 0;
    }
    if (plc->map.state != MB_PLC_BUSY && !plc->map.coil[MB_PLC_COIL_TRIGGER]) {
        rc = read_flag(plc, plc->cfg.trigger_addr, "reading the trigger", RQ_TRIGGER, &set);
        if (rc == -1)
            return;
        if (rc == 0 && set) {
            plc->map.coil[MB_PLC_COIL_TRIGGER] = 1;
            mb_plc_map_apply_writes(&plc->map, 0);
        }
    }
    if (plc->cfg.slot_addr >= 0) {
        uint16_t v = 0;
        if (modbus_read_registers(plc->ctx, plc->cfg.slot_addr, 1, &v) != 1) {
            request_failed(plc, "reading the requested slot", RQ_SLOT);
            return;
        }
        plc->exc_logged &= ~(unsigned)RQ_SLOT;
        if (v != plc->map.req_slot) {
            plc->map.req_slot = v;
            mb_plc_map_apply_writes(&plc->map, 1);
        }
    }
}

static void client_service(mb_plc *plc, int64_t now_ms)
{
    plc->last_now = now_ms;
    if (mb_plc_tick(plc, now_ms))
        plc->block_dirty = 1; /* the block goes out every heartbeat */
    if (plc->link == MB_PLC_LINK_DOWN) {
        if (now_ms >= plc->next_attempt)
            start_connect(plc, now_ms);
        return;
    }
    if (plc->link == MB_PLC_LINK_CONNECTING) {
        struct pollfd p = {.fd = plc->fd, .events = POLLOUT};
        if (poll(&p, 1, 0) > 0) {
            int e = 0;
            socklen_t el = sizeof e;
            if (getsockopt(plc->fd, SOL_SOCKET, SO_ERROR, &e, &el) < 0)
                e = errno;
            if (e == 0)
                link_up(plc, now_ms);
            else
                link_lost(plc, strerror(e));
        } else if (now_ms >= plc->connect_deadline) {
            link_lost(plc, "timed out");
        }
        return;
    }
    /* Up. The PLC never speaks first: readable now means it closed the
     * connection, or bytes we cannot place - either way start afresh. */
    struct pollfd p = {.fd = plc->fd, .events = POLLIN};
    if (poll(&p, 1, 0) > 0) {
        uint8_t b;
        ssize_t n = recv(plc->fd, &b, 1, MSG_PEEK | MSG_DONTWAIT);
        if (n == 0 || (n < 0 && errno != EAGAIN && errno != EINTR)) {
            link_lost(plc, n == 0 ? "closed by the PLC" : strerror(errno));
            return;
        }
        if (n > 0) {
            link_lost(plc, "unexpected bytes from the PLC");
            return;
        }
    }
    if (plc->clear_trigger) {
        if (write_flag(plc, plc->cfg.trigger_addr, "clearing the trigger", RQ_TRIGGER) == -1)
            return;
        plc->clear_trigger = 0;
    }
    if (now_ms >= plc->next_poll) {
        plc->next_poll = now_ms + plc->cfg.poll_ms;
        poll_plc(plc);
        if (plc->link != MB_PLC_LINK_UP)
            return;
    }
    if (plc->block_dirty)
        write_block(plc);
}

static void client_changed(mb_plc *plc, int result)
{
    plc->block_dirty = 1;
    if (plc->link != MB_PLC_LINK_UP) {
        if (result)
            plc->stats.unsent_results++;
        return;
    }
    if (plc->clear_trigger) {
        if (write_flag(plc, plc->cfg.trigger_addr, "clearing the trigger", RQ_TRIGGER) == -1) {
            if (result)
                plc->stats.unsent_results++;
            return;
        }
        plc->clear_trigger = 0;
    }
    if (write_block(plc) == -1 && result)
        plc->stats.unsent_results++;
}

const mb_plc_backend mb_plc_client_backend = {
    client_open, client_close, client_pollfds, client_timeout, client_service,
    client_changed,
};
