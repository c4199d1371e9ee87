/*
 * io/plc_map.h - the PLC register map and the trigger/result handshake,
 * as plain data with pure functions (no sockets: io/plc.h carries them).
 *
 * The map is a contract that PLC programs and outside tests rely on; change
 * it only through an issue. Addresses are Modbus protocol addresses
 * (0-based, as on the wire; a PLC manual may print them as 40001 + address
 * for holding registers and 00001 + address for coils).
 *
 * Holding registers 0-15 (read-only), mirrored identically in input
 * registers 0-15 - "the block":
 *    0  heartbeat, +1 every heartbeat period (100 ms by default), wraps
 *    1  status bits: bit 0 ready, 1 busy, 2 result valid, 3 last verdict
 *       pass, 4 last verdict reject (also set for fault: a PLC must treat a
 *       fault as a reject), 5 station fault, 6 drift warning, 7 logging
 *       problem; bits 8-15 are 0
 *    2  result sequence number, +1 per published result, wraps
 *    3  last verdict: 0 none yet, 1 pass, 2 reject, 3 fault
 *    4  primary reason code of the last result (0 for a pass)
 *    5  active part slot
 *    6-7  parts this shift, 32 bit, high word first
 *    8-9  rejects this shift (verdict reject or fault), high word first
 *   10  last cycle time in 0.1 ms (trigger to verdict), clamped to 65535
 *   11  fault code: the station's current fault if any, otherwise that of
 *       the last result (0 when the last result was not a fault)
 *   12-15  the first four gauges' deviation from nominal in 0.01 mm, two's
 *       complement, clamped to -32767..32767; -32768 (0x8000) means "no
 *       value" (gauge not defined or not measured)
 * Coils (read-write): 0 trigger, 1 result acknowledge, 2 reset shift
 * counters. Holding register 32 (read-write): requested part slot.
 * Every other address is refused with exception 02 (ILLEGAL DATA ADDRESS),
 * every function code other than 01, 03, 04, 05, 06, 15, 16 with exception
 * 01 (ILLEGAL FUNCTION) - Modbus Application Protocol Specification
 * V1.1b3, section 7.
 *
 * Handshake (station side; "PLC" is whoever writes the coils):
 *   PLC sets trigger -> station (mb_plc_map_take_trigger) clears trigger,
 *   sets busy, clears result valid -> station inspects -> station
 *   (mb_plc_map_publish) writes verdict, reason, figures, increments the
 *   sequence, sets result valid, clears busy -> PLC reads the block, then
 *   sets acknowledge -> station (mb_plc_map_apply_writes) clears result
 *   valid and acknowledge.
 * A trigger that arrives while busy stays set and is taken after the
 * result is published: one result per trigger. A result may also be
 * published without a trigger (free-running and hardware-triggered modes).
 *
 * Fail-safe: a pass is published only from a result struct whose verdict
 * is MB_PLC_PASS; anything malformed is published as a fault.
 */
#ifndef MB_PLC_MAP_H
#define MB_PLC_MAP_H

#include <stdint.h>

/** Registers in the block (holding and input 0-15). */
#define MB_PLC_BLOCK_LEN 16
/** Gauges carried in the block (registers 12-15). */
#define MB_PLC_N_GAUGES 4
/** The read-write holding register: requested part slot. */
#define MB_PLC_REG_REQ_SLOT 32
/** Number of coils (0 trigger, 1 acknowledge, 2 reset counters). */
#define MB_PLC_N_COILS 3
/** Register value meaning "this gauge has no value". */
#define MB_PLC_GAUGE_NONE ((uint16_t)0x8000)

/** Register numbers in the block. */
enum {
    MB_PLC_REG_HEARTBEAT = 0,
    MB_PLC_REG_STATUS = 1,
    MB_PLC_REG_SEQUENCE = 2,
    MB_PLC_REG_VERDICT = 3,
    MB_PLC_REG_REASON = 4,
    MB_PLC_REG_SLOT = 5,
    MB_PLC_REG_PARTS_HI = 6,
    MB_PLC_REG_PARTS_LO = 7,
    MB_PLC_REG_REJECTS_HI = 8,
    MB_PLC_REG_REJECTS_LO = 9,
    MB_PLC_REG_CYCLE = 10,
    MB_PLC_REG_FAULT = 11,
    MB_PLC_REG_GAUGE0 = 12
};

/** Coil numbers. */
enum { MB_PLC_COIL_TRIGGER = 0, MB_PLC_COIL_ACK = 1, MB_PLC_COIL_RESET = 2 };

/** Status bits in register 1. */
enum {
    MB_PLC_ST_READY = 1u << 0,
    MB_PLC_ST_BUSY = 1u << 1,
    MB_PLC_ST_VALID = 1u << 2,
    MB_PLC_ST_PASS = 1u << 3,
    MB_PLC_ST_REJECT = 1u << 4,
    MB_PLC_ST_FAULT = 1u << 5,
    MB_PLC_ST_DRIFT = 1u << 6,
    MB_PLC_ST_LOGGING = 1u << 7
};
/** The status bits the station sets directly (the others follow the
 *  handshake and the verdict). */
#define MB_PLC_ST_STATION (MB_PLC_ST_READY | MB_PLC_ST_DRIFT | MB_PLC_ST_LOGGING)

/** Verdict codes in register 3. */
typedef enum {
    MB_PLC_NONE = 0,
    MB_PLC_PASS = 1,
    MB_PLC_REJECT = 2,
    MB_PLC_FAULT = 3
} mb_plc_verdict;

/** Handshake state. */
typedef enum {
    MB_PLC_IDLE = 0,  /**< no result pending an acknowledge */
    MB_PLC_BUSY = 1,  /**< trigger taken, inspecting */
    MB_PLC_RESULT = 2 /**< result valid, waiting for the acknowledge */
} mb_plc_state;

/** Fault code used when a malformed result is turned into a fault. */
#define MB_PLC_FAULT_BAD_RESULT 0xFFFF

/** One inspection result as the PLC sees it. */
typedef struct {
    mb_plc_verdict verdict; /**< MB_PLC_PASS, MB_PLC_REJECT or MB_PLC_FAULT */
    int reason;             /**< primary reason code, 0..65535 (0 for pass) */
    int fault_code;         /**< for a fault: 1..65535 (0 becomes 0xFFFF) */
    double cycle_ms;        /**< trigger to verdict, ms (>= 0) */
    int n_gauges;           /**< gauges measured, 0..; the first 4 are sent */
    double gauge_dev_mm[MB_PLC_N_GAUGES]; /**< deviation from nominal, mm;
                                               NaN = not measured */
} mb_plc_result;

/** The whole map and the handshake state. Plain data: copy freely. */
typedef struct {
    uint16_t block[MB_PLC_BLOCK_LEN]; /**< as sent; rebuilt by every call */
    uint8_t coil[MB_PLC_N_COILS];     /**< trigger, acknowledge, reset */
    uint16_t req_slot;                /**< holding register 32 */
    mb_plc_state state;
    unsigned flags;         /**< MB_PLC_ST_STATION bits set by the station */
    uint16_t heartbeat;
    uint16_t sequence;
    mb_plc_verdict verdict; /**< last verdict */
    uint16_t reason;
    uint16_t slot;          /**< active part slot */
    uint32_t parts, rejects;
    uint16_t cycle;         /**< 0.1 ms */
    uint16_t station_fault; /**< 0 = no station fault */
    uint16_t result_fault;  /**< fault code of the last result */
    uint16_t gauge[MB_PLC_N_GAUGES];
    int reset_pending;      /**< counters were reset by the PLC, not yet taken */
    int slot_pending;       /**< register 32 was written, not yet taken */
} mb_plc_map;

/** Bits returned by mb_plc_map_apply_writes. */
enum {
    MB_PLC_EV_TRIGGER = 1, /**< the trigger coil is set */
    MB_PLC_EV_ACK = 2,     /**< an acknowledge cleared result valid */
    MB_PLC_EV_RESET = 4,   /**< the shift counters were reset */
    MB_PLC_EV_SLOT = 8     /**< register 32 was written */
};

/** Start state: nothing published, all gauges "no value", slot shown in
 *  registers 5 and 32, not ready. */
void mb_plc_map_init(mb_plc_map *m, int slot);

/** Rebuild m->block from the fields (every function below calls it). */
void mb_plc_map_pack(mb_plc_map *m);

/** Advance the heartbeat by one (wraps at 65536). */
void mb_plc_map_heartbeat(mb_plc_map *m);

/**
 * Take a pending trigger: if the trigger coil is set and the station is not
 * busy, clear the coil, set busy and clear result valid.
 * Return value: 1 when a trigger was taken, 0 otherwise.
 */
int mb_plc_map_take_trigger(mb_plc_map *m);

/**
 * Publish a result: verdict, reason, cycle time, gauges, fault code; the
 * sequence and the shift counters advance; result valid set, busy cleared.
 * A NULL result or a verdict other than pass/reject/fault is published as
 * a fault with code MB_PLC_FAULT_BAD_RESULT.
 * Return value: 0; MB_EINVAL when the result was malformed (and published
 * as a fault).
 */
int mb_plc_map_publish(mb_plc_map *m, const mb_plc_result *r);

/**
 * Act on what a PLC wrote (coils and register 32, already stored in
 * m->coil / m->req_slot by the transport); `slot_written` says whether
 * register 32 was written. Acknowledge: clears result valid (when a result
 * is valid) and the acknowledge coil. Reset: zeroes the counters and the
 * reset coil. Return value: MB_PLC_EV_* bits for what happened.
 */
unsigned mb_plc_map_apply_writes(mb_plc_map *m, int slot_written);

/** Set or clear station bits (MB_PLC_ST_STATION only).
 *  Return value: 0; MB_EINVAL for any other bit (nothing changes). */
int mb_plc_map_set_status(mb_plc_map *m, unsigned bits, int on);

/** Station fault code (0..65535; 0 clears the fault bit). */
void mb_plc_map_set_fault(mb_plc_map *m, int code);

/** Active part slot shown in register 5 (0..65535). */
void mb_plc_map_set_slot(mb_plc_map *m, int slot);

/** Set the shift counters (shift start, restart). */
void mb_plc_map_set_counters(mb_plc_map *m, uint32_t parts, uint32_t rejects);

/** A gauge deviation in mm as register value: round(mm * 100) clamped to
 *  -32767..32767; NaN gives MB_PLC_GAUGE_NONE. */
uint16_t mb_plc_gauge_word(double mm);

/** A cycle time in ms as register value: round(ms * 10) clamped to
 *  0..65535 (NaN and negative give 0). */
uint16_t mb_plc_cycle_word(double ms);

/** Split v into two registers, high word first. */
void mb_plc_split32(uint32_t v, uint16_t out[2]);

/**
 * Check a Modbus request PDU (function code and data, no MBAP header)
 * against the map, in the order of the Modbus Application Protocol
 * Specification V1.1b3 (section 6 state diagrams): function code supported
 * (else 01), quantity and byte count and length coherent (else 03), every
 * address in the map and writable when written (else 02).
 * Return value: 0 when the request may be executed, else the exception
 * code (1, 2 or 3) to reply with.
 */
int mb_plc_check_request(const uint8_t *pdu, int len);

#endif
