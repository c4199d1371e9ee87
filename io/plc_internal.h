/*
 * io/plc_internal.h - the PLC link's private struct and the table of
 * transport functions (one file per transport: plc_server.c, plc_client.c).
 * Only io/plc*.c include this.
 */
#ifndef MB_PLC_INTERNAL_H
#define MB_PLC_INTERNAL_H

#include "plc.h"

#include <modbus/modbus.h>
#include <stddef.h>
#include <sys/socket.h>

/** Largest Modbus TCP ADU: 7-byte MBAP header + 253-byte PDU (Modbus
 *  Messaging on TCP/IP Implementation Guide V1.0b, section 3.1.3). */
#define MB_PLC_ADU_MAX 260
#define MB_PLC_MBAP_LEN 7

typedef struct {
    int (*open)(mb_plc *plc, char *err);
    void (*close)(mb_plc *plc);
    int (*pollfds)(const mb_plc *plc, struct pollfd *fds, int max);
    int (*timeout)(const mb_plc *plc, int64_t now_ms);
    void (*service)(mb_plc *plc, int64_t now_ms);
    /* The map changed through the station API; `result` is 1 for a newly
     * published result. Server: mirror into the libmodbus mapping.
     * Client: write to the PLC now if connected. */
    void (*changed)(mb_plc *plc, int result);
} mb_plc_backend;

extern const mb_plc_backend mb_plc_server_backend;
extern const mb_plc_backend mb_plc_client_backend;

typedef struct {
    int family; /* 4 or 6 */
    uint8_t addr[16];
    int prefix;
} mb_plc_net;

/* One server-side connection with its own receive buffer. */
typedef struct {
    int fd;                 /* -1 = free slot */
    uint8_t buf[2 * MB_PLC_ADU_MAX];
    int have;               /* bytes in buf */
    int64_t partial_since;  /* when buf became non-empty */
    int64_t last_rx;        /* last byte received */
    char peer[64];          /* address text for the log */
} mb_plc_conn;

typedef enum {
    MB_PLC_LINK_DOWN = 0,   /* waiting for the next attempt */
    MB_PLC_LINK_CONNECTING, /* non-blocking connect in progress */
    MB_PLC_LINK_UP
} mb_plc_link;

struct mb_plc {
    mb_plc_config cfg;
    const mb_plc_backend *be;
    mb_plc_map map;
    mb_plc_stats stats;
    int64_t next_heartbeat;
    modbus_t *ctx;
    /* server */
    modbus_mapping_t *mapping;
    int listen_fd;
    int port;
    int64_t last_now;           /* now_ms of the last service call */
    int64_t accept_pause_until; /* out of descriptors: listener rests */
    mb_plc_net allow[MB_PLC_MAX_ALLOW];
    int n_allow;
    mb_plc_conn conn[MB_PLC_MAX_CONN];
    /* client */
    struct sockaddr_storage peer;
    socklen_t peer_len;
    int fd;
    mb_plc_link link;
    int64_t next_attempt, connect_deadline, next_poll, next_block;
    int backoff_ms;
    int clear_trigger; /* the PLC's trigger must still be written to 0 */
    int block_dirty;   /* the PLC has not seen the latest block */
    int ack_clear;     /* the PLC's acknowledge must still be written to 0 */
    unsigned exc_logged; /* request kinds whose refusal was logged */
};

/** Send a sentence to the configured log callback (printf-style). */
void mb_plc_log(const mb_plc *plc, int priority, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;

/** Advance the heartbeat when due; return 1 when it advanced. */
int mb_plc_tick(mb_plc *plc, int64_t now_ms);

/** Milliseconds from now to t, clamped to 0..INT_MAX. */
int mb_plc_until(int64_t now_ms, int64_t t);

/** Make fd non-blocking and close-on-exec; 0 or -1. */
int mb_plc_fd_setup(int fd);

/** Printable address of a sockaddr ("10.0.0.5:50123", "[::1]:40000"). */
void mb_plc_addr_text(const struct sockaddr *sa, char *out, size_t n);

#endif
