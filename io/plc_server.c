/*
 * io/plc_server.c - server mode: the PLC polls us over Modbus TCP.
 *
 * libmodbus listens (modbus_tcp_pi_listen), accepts (modbus_tcp_pi_accept)
 * and answers (modbus_reply on a modbus_mapping_t mirror of the map,
 * modbus_reply_exception for refused requests). We frame requests
 * ourselves instead of calling modbus_receive, which waits for a whole
 * frame on one socket: here every connection has its own buffer, filled by
 * non-blocking reads when poll says so, and a request is handled only once
 * complete. The MBAP header (Modbus Messaging on TCP/IP Implementation
 * Guide V1.0b, section 3.1.3) is transaction id (2 bytes), protocol id (2,
 * 0 for Modbus), length (2, counting the unit id and the PDU) and unit id
 * (1); the largest ADU is 260 bytes, so a length outside 2..254 or a
 * protocol id other than 0 cannot be Modbus: the stream cannot be
 * resynchronised and that connection is closed; so is one that sends a
 * function code of 128 or more (reserved for exception responses). Every
 * request is checked
 * by mb_plc_check_request before libmodbus sees it, so libmodbus only ever
 * executes reads of the map and writes of coils 0-2 and register 32.
 * The unit id is not filtered: a server reached directly over TCP answers
 * any (the guide, section 4.4.2, suggests 0xFF; PLCs send 0, 1 or 0xFF).
 */
#include "plc_internal.h"

#include "error.h"

#include <errno.h>
#include <limits.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include <modbus/modbus-tcp.h>

/* Reads per connection per service call: one client cannot starve others. */
#define MB_PLC_READS_PER_SERVICE 4
/* Connections accepted per service call. */
#define MB_PLC_ACCEPTS_PER_SERVICE 8

static void sync_to_mapping(mb_plc *plc)
{
    modbus_mapping_t *mm = plc->mapping;
    for (int i = 0; i < MB_PLC_BLOCK_LEN; i++) {
        mm->tab_registers[i] = plc->map.block[i];
        mm->tab_input_registers[i] = plc->map.block[i];
    }
    mm->tab_registers[MB_PLC_REG_REQ_SLOT] = plc->map.req_slot;
    for (int i = 0; i < MB_PLC_N_COILS; i++)
        mm->tab_bits[i] = plc->map.coil[i] ? 1 : 0;
}

static void server_changed(mb_plc *plc, int result)
{
    (void)result;
    sync_to_mapping(plc);
}

static int server_open(mb_plc *plc, char *err)
{
    char port[16];
    snprintf(port, sizeof port, "%d", plc->cfg.port);
    plc->ctx = modbus_new_tcp_pi(plc->cfg.bind_addr, port);
    if (!plc->ctx)
        return mb_err_set(err, MB_ENOMEM, "plc: cannot create the Modbus context: %s",
                          modbus_strerror(errno));
    /* Not used for serving (we never wait inside libmodbus), but keep any
     * internal wait short. */
    modbus_set_response_timeout(plc->ctx, 0, 20000);
    plc->listen_fd = modbus_tcp_pi_listen(plc->ctx, plc->cfg.max_connections + 4);
    if (plc->listen_fd < 0)
        return mb_err_set(err, MB_EIO, "plc: cannot listen on %s port %d: %s",
                          plc->cfg.bind_addr, plc->cfg.port, strerror(errno));
    if (mb_plc_fd_setup(plc->listen_fd) < 0)
        return mb_err_set(err, MB_EIO, "plc: cannot set up the listening socket: %s",
                          strerror(errno));
    struct sockaddr_storage ss;
    socklen_t sl = sizeof ss;
    if (getsockname(plc->listen_fd, (struct sockaddr *)&ss, &sl) < 0)
        return mb_err_set(err, MB_EIO, "plc: getsockname failed: %s", strerror(errno));
    plc->port = ss.ss_family == AF_INET6
                    ? ntohs(((struct sockaddr_in6 *)&ss)->sin6_port)
                    : ntohs(((struct sockaddr_in *)&ss)->sin_port);
    plc->mapping = modbus_mapping_new_start_address(
        0, MB_PLC_N_COILS, 0, 0, 0, MB_PLC_REG_REQ_SLOT + 1, 0, MB_PLC_BLOCK_LEN);
    if (!plc->mapping)
        return mb_err_set(err, MB_ENOMEM, "plc: cannot allocate the Modbus mapping");
    sync_to_mapping(plc);
    mb_plc_log(plc, MB_PLC_LOG_INFO, "plc: listening on %s port %d (at most %d connections%s)",
               plc->cfg.bind_addr, plc->port, plc->cfg.max_connections,
               plc->n_allow ? ", allow-list on" : "");
    return MB_OK;
}

static void drop(mb_plc *plc, mb_plc_conn *c, uint64_t *counter,
                 const char *why)
{
    if (c->fd < 0)
        return;
    close(c->fd);
    c->fd = -1;
    c->have = 0;
    plc->stats.connections--;
    if (counter)
        (*counter)++;
    mb_plc_log(plc, counter == &plc->stats.closed_by_peer ? MB_PLC_LOG_INFO
                                                           : MB_PLC_LOG_WARNING,
               "plc: connection from %s closed: %s", c->peer, why);
}

static void server_close(mb_plc *plc)
{
    for (int i = 0; i < MB_PLC_MAX_CONN; i++)
        if (plc->conn[i].fd >= 0) {
            close(plc->conn[i].fd);
            plc->conn[i].fd = -1;
        }
    plc->stats.connections = 0;
    if (plc->listen_fd >= 0)
        close(plc->listen_fd);
    plc->listen_fd = -1;
    if (plc->mapping)
        modbus_mapping_free(plc->mapping);
    plc->mapping = NULL;
    if (plc->ctx) {
        modbus_set_socket(plc->ctx, -1); /* the fds are closed above */
        modbus_free(plc->ctx);
    }
    plc->ctx = NULL;
}

static int server_pollfds(const mb_plc *plc, struct pollfd *fds, int max)
{
    int n = 0;
    if (plc->listen_fd >= 0 && n < max &&
        plc->last_now >= plc->accept_pause_until) {
        fds[n].fd = plc->listen_fd;
        fds[n].events = POLLIN;
        fds[n].revents = 0;
        n++;
    }
    for (int i = 0; i < MB_PLC_MAX_CONN && n < max; i++)
        if (plc->conn[i].fd >= 0) {
            fds[n].fd = plc->conn[i].fd;
            fds[n].events = POLLIN;
            fds[n].revents = 0;
            n++;
        }
    return n;
}

static int server_timeout(const mb_plc *plc, int64_t now_ms)
{
    int t = INT_MAX;
    if (plc->accept_pause_until > now_ms)
        t = mb_plc_until(now_ms, plc->accept_pause_until);
    for (int i = 0; i < MB_PLC_MAX_CONN; i++) {
        const mb_plc_conn *c = &plc->conn[i];
        if (c->fd < 0)
            continue;
        if (c->have > 0) {
            int u = mb_plc_until(now_ms, c->partial_since + plc->cfg.frame_timeout_ms);
            t = u < t ? u : t;
        }
        if (plc->cfg.idle_timeout_ms > 0) {
            int u = mb_plc_until(now_ms, c->last_rx + plc->cfg.idle_timeout_ms);
            t = u < t ? u : t;
        }
    }
    return t;
}

static int allowed(const mb_plc *plc, const struct sockaddr_storage *ss)
{
    if (plc->n_allow == 0)
        return 1;
    uint8_t a[16] = {0};
    int fam;
    if (ss->ss_family == AF_INET) {
        memcpy(a, &((const struct sockaddr_in *)ss)->sin_addr, 4);
        fam = 4;
    } else if (ss->ss_family == AF_INET6) {
        memcpy(a, &((const struct sockaddr_in6 *)ss)->sin6_addr, 16);
        fam = 6;
    } else {
        return 0;
    }
    for (int i = 0; i < plc->n_allow; i++)
        if (mb_plc_net_match(fam, a, plc->allow[i].family, plc->allow[i].addr,
                             plc->allow[i].prefix))
            return 1;
    return 0;
}

static void accept_some(mb_plc *plc, int64_t now_ms)
{
    for (int k = 0; k < MB_PLC_ACCEPTS_PER_SERVICE; k++) {
        int fd = modbus_tcp_pi_accept(plc->ctx, &plc->listen_fd);
        if (fd < 0) {
            if (errno == EINTR || errno == ECONNABORTED)
                continue;
            if (errno != EAGAIN && errno != EWOULDBLOCK) {
                /* Out of descriptors (or worse): the pending connection
                 * keeps the listener readable, so rest it for a while
                 * rather than spin the loop. */
                mb_plc_log(plc, MB_PLC_LOG_ERR,
                           "plc: accept failed: %s; not accepting for 1 s",
                           strerror(errno));
                plc->accept_pause_until = now_ms + 1000;
            }
            return;
        }
        modbus_set_socket(plc->ctx, -1);
        struct sockaddr_storage ss;
        socklen_t sl = sizeof ss;
        char peer[64] = "(unknown)";
        memset(&ss, 0, sizeof ss);
        if (getpeername(fd, (struct sockaddr *)&ss, &sl) == 0)
            mb_plc_addr_text((struct sockaddr *)&ss, peer, sizeof peer);
        if (!allowed(plc, &ss)) {
            close(fd);
            plc->stats.refused_allow++;
            mb_plc_log(plc, MB_PLC_LOG_WARNING,
                       "plc: connection from %s refused: not on the allow-list", peer);
            continue;
        }
        mb_plc_conn *c = NULL;
        if (plc->stats.connections < plc->cfg.max_connections)
            for (int i = 0; i < MB_PLC_MAX_CONN; i++)
                if (plc->conn[i].fd < 0) {
                    c = &plc->conn[i];
                    break;
                }
        if (!c) {
            close(fd);
            plc->stats.refused_full++;
            mb_plc_log(plc, MB_PLC_LOG_WARNING,
                       "plc: connection from %s refused: %d connections open already",
                       peer, plc->cfg.max_connections);
            continue;
        }
        if (mb_plc_fd_setup(fd) < 0) {
            close(fd);
            plc->stats.dropped_error++;
            continue;
        }
        int one = 1; /* replies are single small segments: send at once */
        setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof one);
        c->fd = fd;
        c->have = 0;
        c->partial_since = now_ms;
        c->last_rx = now_ms;
        snprintf(c->peer, sizeof c->peer, "%s", peer);
        plc->stats.connections++;
        plc->stats.accepted++;
        mb_plc_log(plc, MB_PLC_LOG_INFO, "plc: connection from %s", peer);
    }
}

/* Answer one complete request frame (MBAP header + PDU). Returns 0, or -1
 * when the reply could not be sent (the caller drops the connection). */
static int answer(mb_plc *plc, mb_plc_conn *c, const uint8_t *frame, int len)
{
    const uint8_t *pdu = frame + MB_PLC_MBAP_LEN;
    int plen = len - MB_PLC_MBAP_LEN;
    int ex = mb_plc_check_request(pdu, plen);
    int rc;
    modbus_set_socket(plc->ctx, c->fd);
    if (ex) {
        rc = modbus_reply_exception(plc->ctx, frame, (unsigned)ex);
        plc->stats.exceptions++;
    } else {
        sync_to_mapping(plc);
        rc = modbus_reply(plc->ctx, frame, len, plc->mapping);
        plc->stats.requests++;
        int fc = pdu[0];
        if (fc == 0x05 || fc == 0x06 || fc == 0x0F || fc == 0x10) {
            for (int i = 0; i < MB_PLC_N_COILS; i++)
                plc->map.coil[i] = plc->mapping->tab_bits[i] ? 1 : 0;
            int slot_written = fc == 0x06 || fc == 0x10;
            if (slot_written)
                plc->map.req_slot = plc->mapping->tab_registers[MB_PLC_REG_REQ_SLOT];
            mb_plc_map_apply_writes(&plc->map, slot_written);
            sync_to_mapping(plc);
        }
    }
    modbus_set_socket(plc->ctx, -1);
    return rc < 0 ? -1 : 0;
}

/* Handle every complete frame in c->buf. Returns -1 when the connection
 * was dropped. */
static int frames(mb_plc *plc, mb_plc_conn *c, int64_t now_ms)
{
    int off = 0;
    while (c->have - off >= MB_PLC_MBAP_LEN) {
        const uint8_t *f = c->buf + off;
        int proto = (f[2] << 8) | f[3];
        int len = (f[4] << 8) | f[5];
        if (proto != 0 || len < 2 || len > MB_PLC_ADU_MAX - 6) {
            char why[96];
            snprintf(why, sizeof why, "not Modbus TCP (protocol id %d, length %d)",
                     proto, len);
            drop(plc, c, &plc->stats.dropped_framing, why);
            return -1;
        }
        int total = 6 + len;
        if (c->have - off < total)
            break;
        if (f[MB_PLC_MBAP_LEN] & 0x80) {
            /* 128-255 are reserved for exception responses (Modbus
             * Application Protocol Specification V1.1b3, section 4.1): no
             * client sends them, and no exception reply can echo them. */
            char why[96];
            snprintf(why, sizeof why, "function code %d is not a request",
                     f[MB_PLC_MBAP_LEN]);
            drop(plc, c, &plc->stats.dropped_framing, why);
            return -1;
        }
        if (answer(plc, c, f, total) < 0) {
            char why[96];
            snprintf(why, sizeof why, "reply not sent: %s", strerror(errno));
            drop(plc, c, &plc->stats.dropped_error, why);
            return -1;
        }
        off += total;
    }
    if (off > 0) {
        memmove(c->buf, c->buf + off, (size_t)(c->have - off));
        c->have -= off;
        c->partial_since = now_ms;
    }
    return 0;
}

static void read_conn(mb_plc *plc, mb_plc_conn *c, int64_t now_ms)
{
    for (int k = 0; k < MB_PLC_READS_PER_SERVICE; k++) {
        int space = (int)sizeof c->buf - c->have;
        ssize_t n = recv(c->fd, c->buf + c->have, (size_t)space, 0);
        if (n == 0) {
            drop(plc, c, &plc->stats.closed_by_peer, "closed by the client");
            return;
        }
        if (n < 0) {
            if (errno == EINTR)
                continue;
            if (errno != EAGAIN && errno != EWOULDBLOCK) {
                char why[96];
                snprintf(why, sizeof why, "read failed: %s", strerror(errno));
                drop(plc, c, &plc->stats.dropped_error, why);
            }
            return;
        }
        if (c->have == 0)
            c->partial_since = now_ms;
        c->have += (int)n;
        c->last_rx = now_ms;
        if (frames(plc, c, now_ms) < 0)
            return;
        if (n < space)
            return; /* drained */
    }
}

static void server_service(mb_plc *plc, int64_t now_ms)
{
    plc->last_now = now_ms;
    if (mb_plc_tick(plc, now_ms))
        sync_to_mapping(plc);
    struct pollfd fds[1 + MB_PLC_MAX_CONN];
    int idx[1 + MB_PLC_MAX_CONN];
    int n = 0;
    if (plc->listen_fd >= 0 && now_ms >= plc->accept_pause_until) {
        fds[n] = (struct pollfd){.fd = plc->listen_fd, .events = POLLIN};
        idx[n++] = -1;
    }
    for (int i = 0; i < MB_PLC_MAX_CONN; i++)
        if (plc->conn[i].fd >= 0) {
            fds[n] = (struct pollfd){.fd = plc->conn[i].fd, .events = POLLIN};
            idx[n++] = i;
        }
    int ready = n ? poll(fds, (nfds_t)n, 0) : 0;
    for (int k = 0; ready > 0 && k < n; k++) {
        if (!fds[k].revents)
            continue;
        if (idx[k] < 0)
            accept_some(plc, now_ms);
        else if (plc->conn[idx[k]].fd == fds[k].fd)
            read_conn(plc, &plc->conn[idx[k]], now_ms);
    }
    for (int i = 0; i < MB_PLC_MAX_CONN; i++) {
        mb_plc_conn *c = &plc->conn[i];
        if (c->fd < 0)
            continue;
        if (c->have > 0 && now_ms - c->partial_since >= plc->cfg.frame_timeout_ms)
            drop(plc, c, &plc->stats.dropped_timeout, "request left incomplete");
        else if (plc->cfg.idle_timeout_ms > 0 &&
                 now_ms - c->last_rx >= plc->cfg.idle_timeout_ms)
            drop(plc, c, &plc->stats.dropped_timeout, "idle");
    }
}

const mb_plc_backend mb_plc_server_backend = {
    server_open, server_close, server_pollfds, server_timeout, server_service,
    server_changed,
};
