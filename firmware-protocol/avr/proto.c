/* Wire helpers shared by the probe firmware and the harness (see proto.h). */
#include "proto.h"

#ifdef __AVR__
#include <avr/pgmspace.h>
#define TABLE const uint32_t PROGMEM
#define NIBBLE(i) pgm_read_dword(&crc_nibble[i])
#else
#define TABLE const uint32_t
#define NIBBLE(i) crc_nibble[i]
#endif

/* CRC-32/ISO-HDLC, reflected polynomial 0xEDB88320, a nibble at a time (64-byte table). */
static TABLE crc_nibble[16] = {
    0x00000000UL, 0x1DB71064UL, 0x3B6E20C8UL, 0x26D930ACUL, 0x76DC4190UL, 0x6B6B51F4UL,
    0x4DB26158UL, 0x5005713CUL, 0xEDB88320UL, 0xF00F9344UL, 0xD6D6A3E8UL, 0xCB61B38CUL,
    0x9B64C2B0UL, 0x86D3D2D4UL, 0xA00AE278UL, 0xBDBDF21CUL};

uint32_t proto_crc32_init(void) { return 0xFFFFFFFFUL; }

uint32_t proto_crc32_update(uint32_t crc, const uint8_t *p, uint16_t n) {
    while (n--) {
        crc ^= *p++;
        crc = (crc >> 4) ^ NIBBLE(crc & 15);
        crc = (crc >> 4) ^ NIBBLE(crc & 15);
    }
    return crc;
}

uint32_t proto_crc32_final(uint32_t crc) { return crc ^ 0xFFFFFFFFUL; }

void proto_cobs_put(const uint8_t *p, uint16_t n, void (*put)(uint8_t)) {
    uint16_t i = 0;
    for (;;) {
        uint16_t j = i;
        while (j < n && p[j] != 0 && j - i < 254) j++;
        put((uint8_t)(j - i + 1));
        for (uint16_t k = i; k < j; k++) put(p[k]);
        if (j >= n) break;
        if (j - i == 254) {
            i = j; /* a full block consumes no zero */
            continue;
        }
        i = j + 1; /* skip the zero this block stands for */
    }
    put(0);
}

int16_t proto_cobs_decode(const uint8_t *in, uint16_t n, uint8_t *out, uint16_t cap) {
    uint16_t i = 0, o = 0;
    while (i < n) {
        uint8_t code = in[i++];
        if (code == 0) return -1;
        for (uint8_t k = 1; k < code; k++) {
            if (i >= n || o >= cap || in[i] == 0) return -1;
            out[o++] = in[i++];
        }
        if (code != 0xFF && i < n) {
            if (o >= cap) return -1;
            out[o++] = 0;
        }
    }
    return (int16_t)o;
}

uint8_t proto_leb128_put(uint8_t *out, uint64_t v) {
    uint8_t n = 0;
    do {
        uint8_t b = (uint8_t)(v & 0x7F);
        v >>= 7;
        out[n++] = v ? (uint8_t)(b | 0x80) : b;
    } while (v);
    return n;
}

uint8_t proto_leb128_get(const uint8_t *in, uint16_t n, uint64_t *v) {
    uint64_t r = 0;
    for (uint8_t i = 0; i < 10 && i < n; i++) {
        r |= (uint64_t)(in[i] & 0x7F) << (7 * i);
        if (!(in[i] & 0x80)) {
            *v = r;
            return (uint8_t)(i + 1);
        }
    }
    return 0;
}

void proto_put16(uint8_t *p, uint16_t v) {
    p[0] = (uint8_t)v;
    p[1] = (uint8_t)(v >> 8);
}
void proto_put32(uint8_t *p, uint32_t v) {
    proto_put16(p, (uint16_t)v);
    proto_put16(p + 2, (uint16_t)(v >> 16));
}
void proto_put64(uint8_t *p, uint64_t v) {
    proto_put32(p, (uint32_t)v);
    proto_put32(p + 4, (uint32_t)(v >> 32));
}
uint16_t proto_get16(const uint8_t *p) { return (uint16_t)(p[0] | ((uint16_t)p[1] << 8)); }
uint32_t proto_get32(const uint8_t *p) {
    return proto_get16(p) | ((uint32_t)proto_get16(p + 2) << 16);
}
uint64_t proto_get64(const uint8_t *p) {
    return proto_get32(p) | ((uint64_t)proto_get32(p + 4) << 32);
}
