/* Wire helpers shared by the probe firmware and the simulator harness: CRC-32, COBS, LEB128,
 * little-endian fields. Plain C99, no allocation, no I/O; see ../PROTOCOL.md sections 2 and 5. */
#ifndef SLACKMETER_PROTO_H
#define SLACKMETER_PROTO_H

#include <stdint.h>

#define PROTO_VERSION 1
#define PROTO_MAX_FRAME 1024u /* decoded bytes, header and CRC included */
#define PROTO_HEADER 4u
#define PROTO_CRC 4u

/* message types (PROTOCOL.md section 5) */
enum {
    MSG_HELLO = 0x01, MSG_EDGES = 0x02, MSG_COUNT = 0x03, MSG_ANALOG = 0x04, MSG_LINES = 0x05,
    MSG_STATUS = 0x06, MSG_ACK = 0x07, MSG_LOG = 0x08,
    MSG_DESCRIBE = 0x41, MSG_START = 0x42, MSG_STOP = 0x43, MSG_CONFIGURE = 0x44, MSG_PING = 0x45
};

/* ACK results (PROTOCOL.md 5.6) */
enum {
    ACK_OK = 0, ACK_UNKNOWN = 1, ACK_BAD_CHANNEL = 2, ACK_BAD_PARAM = 3, ACK_BAD_VALUE = 4,
    ACK_BAD_FRAME = 5, ACK_BUSY = 6, ACK_BAD_VERSION = 7
};

/* CONFIGURE parameters (PROTOCOL.md 5.8) */
enum {
    CFG_ENABLE = 1, CFG_EDGE_MODE = 2, CFG_GATE = 3, CFG_SAMPLE_INTERVAL = 4, CFG_DUTY_SAMPLES = 5,
    CFG_CAL_SCALE = 6, CFG_CAL_OFFSET = 7, CFG_STATUS_INTERVAL = 8
};

/* CRC-32/ISO-HDLC, continued from `crc` (start with proto_crc32_init()). */
uint32_t proto_crc32_init(void);
uint32_t proto_crc32_update(uint32_t crc, const uint8_t *p, uint16_t n);
uint32_t proto_crc32_final(uint32_t crc);

/* COBS-encode n bytes and the 0x00 delimiter through put(). */
void proto_cobs_put(const uint8_t *p, uint16_t n, void (*put)(uint8_t));

/* COBS-decode one frame (without its delimiter) into out; returns the decoded length, or -1 when
 * the structure is invalid or the result would not fit in cap bytes. */
int16_t proto_cobs_decode(const uint8_t *in, uint16_t n, uint8_t *out, uint16_t cap);

/* Unsigned LEB128 of v into out (at most 10 bytes); returns the length. */
uint8_t proto_leb128_put(uint8_t *out, uint64_t v);

/* Read one unsigned LEB128 value; returns bytes used, 0 when malformed or truncated. */
uint8_t proto_leb128_get(const uint8_t *in, uint16_t n, uint64_t *v);

void proto_put16(uint8_t *p, uint16_t v);
void proto_put32(uint8_t *p, uint32_t v);
void proto_put64(uint8_t *p, uint64_t v);
uint16_t proto_get16(const uint8_t *p);
uint32_t proto_get32(const uint8_t *p);
uint64_t proto_get64(const uint8_t *p);

#endif
