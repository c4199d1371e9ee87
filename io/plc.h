/*
 * io/plc.h - the PLC link over Modbus TCP (libmodbus), in the two
 * directions plants use, behind one opaque handle:
 *
 *   server mode: the PLC polls us. We listen on a configured address and
 *     port, serve several PLC connections from the station's poll loop,
 *     refuse connections beyond a bound and, when an allow-list is given,
 *     from addresses not on it. Requests are framed by us (MBAP header,
 *     Modbus Messaging on TCP/IP Implementation Guide V1.0b, section 3.1.3)
 *     with a buffer per connection, so a client that sends half a frame
 *     stalls nobody; each complete request is checked against the map
 *     (io/plc_map.h) and answered with libmodbus's modbus_reply or
 *     modbus_reply_exception. Garbage framing (protocol id not 0, length
 *     outside 2..254) drops that connection only.
 *   client mode: we write to the PLC. The 16-register block goes to a
 *     configured holding-register address after every result and every
 *     heartbeat period; the trigger (and optionally an acknowledge and a
 *     requested slot) are read from configured PLC addresses. The link
 *     reconnects with exponential back-off; results made while the PLC is
 *     unreachable are counted and the latest (the block always holds it)
 *     is written on reconnect.
 *
 * The register map and the handshake are in io/plc_map.h.
 *
 * Poll loop integration: the handle never blocks on a connection except
 * for one client-mode request/response round trip (bounded by timeout_ms;
 * connecting itself is non-blocking). Each loop iteration:
 *     n = mb_plc_pollfds(plc, fds, max);        (add the station's own fds)
 *     poll(fds, n + ..., mb_plc_timeout_ms(plc, now));
 *     mb_plc_service(plc, now_ms);              (serves what is ready)
 *     if (mb_plc_take_trigger(plc)) ... inspect ... mb_plc_publish(...)
 * mb_plc_service polls its own descriptors with a zero timeout, so the
 * caller need not pass revents back. Times are CLOCK_MONOTONIC
 * milliseconds from the caller (mb_plc_now_ms gives them).
 *
 * Thread safety: none; one handle belongs to one loop. The library never
 * prints: events go to the optional log callback.
 */
#ifndef MB_PLC_H
#define MB_PLC_H

#include <poll.h>
#include <stdint.h>

#include "plc_map.h"

#define MB_PLC_ADDR_LEN 128 /**< text address buffers (IPv4, IPv6, CIDR) */
#define MB_PLC_MAX_ALLOW 16 /**< allow-list entries */
#define MB_PLC_MAX_CONN 32  /**< upper bound of max_connections */

typedef enum { MB_PLC_SERVER = 0, MB_PLC_CLIENT = 1 } mb_plc_mode;

/** Where the client reads the trigger (and acknowledge) in the PLC. */
typedef enum {
    MB_PLC_ON_COIL = 0,    /**< a coil: 1 = set */
    MB_PLC_ON_REGISTER = 1 /**< a holding register: nonzero = set */
} mb_plc_kind;

/** Log priorities, as syslog / sd-daemon (3 error, 4 warning, 6 info). */
enum { MB_PLC_LOG_ERR = 3, MB_PLC_LOG_WARNING = 4, MB_PLC_LOG_INFO = 6 };

/** Log callback: one sentence without newline. */
typedef void (*mb_plc_log_fn)(void *user, int priority, const char *msg);

typedef struct {
    mb_plc_mode mode;
    /* ---- server mode ---- */
    /** Numeric address to listen on: "127.0.0.1" (default: this machine
     *  only), a LAN address, "0.0.0.0" or "::" for all. */
    char bind_addr[MB_PLC_ADDR_LEN];
    /** TCP port; 502 is the Modbus standard (needs CAP_NET_BIND_SERVICE);
     *  0 picks a free port (tests; mb_plc_port tells which). Default 502. */
    int port;
    /** PLC connections served at once, 1..MB_PLC_MAX_CONN; more are
     *  accepted and closed at once. Default 4. */
    int max_connections;
    /** Allowed client addresses: IPv4 or IPv6, optionally /prefix (CIDR).
     *  n_allow == 0 allows everyone. IPv4 clients of a dual-stack listener
     *  match IPv4 entries. */
    int n_allow;
    char allow[MB_PLC_MAX_ALLOW][MB_PLC_ADDR_LEN];
    /** A request left incomplete this long drops its connection (a client
     *  that stalls mid-frame must not hold a connection slot). Default
     *  1000 ms. */
    int frame_timeout_ms;
    /** A connection silent this long is closed; 0 = never (default). */
    int idle_timeout_ms;
    /* ---- client mode ---- */
    char peer_addr[MB_PLC_ADDR_LEN]; /**< the PLC: host name or address */
    int peer_port;                   /**< default 502 */
    int unit_id;                     /**< 0..247 or 255 (default 255) */
    int block_addr;    /**< PLC holding register receiving the block */
    mb_plc_kind trigger_kind; /**< coil or register (also for ack) */
    int trigger_addr;  /**< PLC address of the trigger */
    int ack_addr;      /**< PLC address of the acknowledge; -1 = none
                            (result valid then stays until next trigger) */
    int slot_addr;     /**< PLC holding register with the requested slot;
                            -1 = none */
    int poll_ms;       /**< trigger read period, default 10 ms */
    int timeout_ms;    /**< connect and response timeout, default 100 ms */
    int backoff_min_ms; /**< first reconnect delay, default 100 ms */
    int backoff_max_ms; /**< reconnect delay cap (doubling), default 5000 */
    /* ---- both ---- */
    int heartbeat_ms;  /**< heartbeat period, default 100 ms */
    int active_slot;   /**< part slot shown at start (registers 5 and 32) */
    mb_plc_log_fn log; /**< optional */
    void *log_user;
} mb_plc_config;

/** Counters of what happened on the link since open. */
typedef struct {
    int connections;          /**< open now (client: 1 when connected) */
    uint64_t accepted;        /**< server: connections taken */
    uint64_t refused_full;    /**< server: closed at once, no free slot */
    uint64_t refused_allow;   /**< server: closed at once, not allowed */
    uint64_t dropped_framing; /**< server: bad protocol id or length */
    uint64_t dropped_timeout; /**< server: stalled mid-frame or idle */
    uint64_t dropped_error;   /**< server: socket error or reply failed */
    uint64_t closed_by_peer;  /**< server: orderly close by the client */
    uint64_t requests;        /**< server: requests answered normally */
    uint64_t exceptions;      /**< server: exception responses sent */
    uint64_t connects;        /**< client: connections made */
    uint64_t connect_failures; /**< client: attempts that failed */
    uint64_t link_failures;   /**< client: connections lost */
    uint64_t block_writes;    /**< client: block writes acknowledged */
    uint64_t plc_exceptions;  /**< client: exception responses from the PLC */
    uint64_t unsent_results;  /**< client: results published while down */
} mb_plc_stats;

typedef struct mb_plc mb_plc;

/** Fill cfg with the defaults named above (server mode). */
void mb_plc_config_default(mb_plc_config *cfg);

/**
 * Check a configuration without opening anything.
 * Return value: 0; MB_EINVAL or MB_ERANGE with a sentence naming the field
 * (e.g. "plc.allow[2]: '10.0.0.0/33' is not an IPv4/IPv6 address with an
 * optional /prefix").
 */
int mb_plc_config_check(const mb_plc_config *cfg, char *err);

/**
 * Open the link: server mode binds and listens (fails if the address or
 * port is unavailable); client mode resolves the PLC address and starts
 * connecting in the background (an unreachable PLC is not an error here).
 * now_ms starts the heartbeat.
 * Return value: 0; MB_EINVAL / MB_ERANGE (bad config); MB_EIO (cannot
 * bind/listen: the sentence names address, port and the system's reason;
 * or the PLC's name does not resolve); MB_ENOMEM.
 */
int mb_plc_open(const mb_plc_config *cfg, int64_t now_ms, mb_plc **out,
                char *err);

/** Close every connection and free. NULL-safe. */
void mb_plc_close(mb_plc *plc);

/** CLOCK_MONOTONIC in milliseconds. */
int64_t mb_plc_now_ms(void);

/** Descriptors to poll (at most max, at most 1 + max_connections are ever
 *  needed). Return value: the number written. */
int mb_plc_pollfds(const mb_plc *plc, struct pollfd *fds, int max);

/** Milliseconds until mb_plc_service has timed work (heartbeat, trigger
 *  read, reconnect, frame timeout); 0 when due now. */
int mb_plc_timeout_ms(const mb_plc *plc, int64_t now_ms);

/**
 * Serve whatever is ready and do what is due: heartbeat, accept, read and
 * answer requests, acknowledge and counter-reset coils (acted on at once);
 * client: connect, write the block, read trigger/acknowledge/slot.
 * Bad network input only ever closes the offending connection.
 * Return value: 0; MB_EINVAL for a NULL handle.
 */
int mb_plc_service(mb_plc *plc, int64_t now_ms);

/** Take a pending trigger (see mb_plc_map_take_trigger): trigger cleared
 *  (client: also in the PLC), busy set, result valid cleared.
 *  Return value: 1 taken, 0 none. */
int mb_plc_take_trigger(mb_plc *plc);

/**
 * Publish a result (see mb_plc_map_publish); client mode writes the block
 * at once when connected, else counts the result as unsent.
 * Return value: 0; MB_EINVAL when r was NULL or its verdict not pass,
 * reject or fault - it was then published as a fault.
 */
int mb_plc_publish(mb_plc *plc, const mb_plc_result *r);

/** Publish a fault (verdict 3) with a fault code (1..65535), a reason code
 *  and the cycle time. Return value: 0; MB_EINVAL for a NULL handle. */
int mb_plc_publish_fault(mb_plc *plc, int fault_code, int reason,
                         double cycle_ms);

/** Set or clear MB_PLC_ST_READY / _DRIFT / _LOGGING. Return value: 0;
 *  MB_EINVAL for other bits. */
int mb_plc_set_status(mb_plc *plc, unsigned bits, int on);

/** Station fault (status bit 5 and register 11); 0 clears it. */
void mb_plc_set_fault(mb_plc *plc, int fault_code);

/** The part slot now active (register 5). */
void mb_plc_set_active_slot(mb_plc *plc, int slot);

/** Shift counters (registers 6-9), e.g. at shift start. */
void mb_plc_set_counters(mb_plc *plc, uint32_t parts, uint32_t rejects);

/** 1 (and *slot) once after the PLC wrote the requested slot, else 0. */
int mb_plc_take_slot_request(mb_plc *plc, int *slot);

/** 1 once after the PLC reset the shift counters (already zeroed), else 0. */
int mb_plc_take_counter_reset(mb_plc *plc);

/** The map as it is now (block, coils, state). NULL-safe (zeroes). */
void mb_plc_get_map(const mb_plc *plc, mb_plc_map *out);

/** The counters. NULL-safe (zeroes). */
void mb_plc_get_stats(const mb_plc *plc, mb_plc_stats *out);

/** The port listened on (server; the real one when 0 was asked), or the
 *  PLC's port (client). */
int mb_plc_port(const mb_plc *plc);

/** Client: 1 when connected to the PLC. Server: the connections open. */
int mb_plc_connected(const mb_plc *plc);

/**
 * Parse one allow-list entry ("192.168.1.20", "10.0.0.0/8", "fd00::/8",
 * "::1") into family (4 or 6), 16 address bytes (IPv4 in the first 4) and
 * prefix length. Return value: 0; MB_EINVAL.
 */
int mb_plc_net_parse(const char *s, int *family, uint8_t addr[16],
                     int *prefix);

/** Does a client address (family 4 or 6, bytes as above) fall in the
 *  entry? IPv4-mapped IPv6 clients (::ffff:a.b.c.d) compare as IPv4. */
int mb_plc_net_match(int family, const uint8_t addr[16], int net_family,
                     const uint8_t net[16], int prefix);

#endif
