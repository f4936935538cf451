/* slackmeter probe firmware for the RP2040 (bare metal, no SDK): a PIO state machine times
 * every high and low phase of the clock on GPIO2 at two system-clock cycles per count, DMA moves
 * the counts into a ring in SRAM, and the core turns them into per-edge timestamps (EDGES, as far
 * as the link allows), per-window extremes of every cycle (EXTREMES) and threshold counts
 * (VIOLATIONS), sent over UART0 in the framing of ../PROTOCOL.md (helpers in ../avr/proto.c).
 * See README.md for the limits measured in emulation and its wiring section (with the
 * cautions: the RP2040's pins are 3.3 V only) before connecting anything. */
#include <stdbool.h>
#include <stdint.h>

#include "../avr/proto.h"
#include "rp2040.h"

#ifndef MAX_EDGE_KHZ
#define MAX_EDGE_KHZ 0 /* set by the Makefile from the figure measured in emulation */
#endif
#ifndef TIMEBASE_PPM
#define TIMEBASE_PPM 50
#endif
#define FIRMWARE_ID "slackmeter-rp2040 0.1"

#define SYS_HZ 125000000u
#define TICK_HZ (SYS_HZ / 2u) /* one tick = one PIO count = two system-clock cycles, 16 ns */
#define CLK_PIN 2u
#define CH_CLK 0u

enum { MSG_EXTREMES = 0x09, MSG_VIOLATIONS = 0x0A };
enum { CFG_HIGH_THRESHOLD = 9, CFG_LOW_THRESHOLD = 10, CFG_WINDOW = 11 };
enum { MODE_STAMPS = 0, MODE_BOTH = 2, MODE_EXTREMES = 3 };
#define FLAG_LOST 1u
#define FLAG_BURST 2u

/* ---------------------------------------------------------------- start-up */

extern uint32_t __stack_top, __bss_start, __bss_end;
int main(void);

static void reset_handler(void) {
    for (uint32_t *p = &__bss_start; p < &__bss_end; p++) *p = 0;
    REG(SCB_VTOR) = 0x20000000u;
    main();
    for (;;) {
    }
}

static void idle_handler(void) {
    for (;;) {
    }
}

/* 16 system vectors and 32 interrupts; none is enabled, so every slot but reset idles */
__attribute__((section(".vectors"), used)) static void (*const vectors[48])(void) = {
    (void (*)(void))(uintptr_t)&__stack_top, reset_handler, idle_handler, idle_handler,
    [4 ... 47] = idle_handler,
};

/* gcc may call these for loops and copies even in a freestanding build */
void *memcpy(void *d, const void *s, unsigned n);
void *memset(void *d, int c, unsigned n);
void *memcpy(void *d, const void *s, unsigned n) {
    uint8_t *o = d;
    const uint8_t *i = s;
    while (n--) *o++ = *i++;
    return d;
}
void *memset(void *d, int c, unsigned n) {
    uint8_t *o = d;
    while (n--) *o++ = (uint8_t)c;
    return d;
}

/* ---------------------------------------------------------------- hardware */

static void unreset(uint32_t bits) {
    REG_CLR(RESETS_RESET) = bits;
    while ((REG(RESETS_DONE) & bits) != bits) {
    }
}

/* 125 MHz from the 12 MHz crystal: VCO 1500 MHz (REFDIV 1, FBDIV 125), POSTDIV 6 and 2. */
static void clocks_init(void) {
    REG(XOSC_STARTUP) = 47;      /* ~1 ms at 12 MHz, in units of 256 cycles */
    REG(XOSC_CTRL) = 0xFABAA0u;  /* ENABLE magic, 1-15 MHz range */
    while (!(REG(XOSC_STATUS) & XOSC_STABLE)) {
    }
    REG(CLK_REF_CTRL) = 2;       /* clk_ref from XOSC */
    while (!(REG(CLK_REF_SELECTED) & (1u << 2))) {
    }
    REG(CLK_SYS_CTRL) = 0;       /* clk_sys from clk_ref while the PLL starts */
    while (!(REG(CLK_SYS_SELECTED) & 1u)) {
    }
    REG_SET(RESETS_RESET) = RST_PLL_SYS;
    unreset(RST_PLL_SYS);
    REG(PLL_CS) = 1;             /* REFDIV 1 */
    REG(PLL_FBDIV_INT) = 125;
    REG_CLR(PLL_PWR) = (1u << 0) | (1u << 5); /* power up PD and VCOPD */
    while (!(REG(PLL_CS) & PLL_LOCK)) {
    }
    REG(PLL_PRIM) = (6u << 16) | (2u << 12);
    REG_CLR(PLL_PWR) = 1u << 3;  /* POSTDIVPD */
    REG(CLK_SYS_CTRL) = 1;       /* SRC = aux (AUXSRC 0 = PLL_SYS) */
    while (!(REG(CLK_SYS_SELECTED) & 2u)) {
    }
    REG(CLK_PERI_CTRL) = CLK_ENABLE; /* clk_peri = clk_sys */
}

/* UART0 on GPIO0 (TX) and GPIO1 (RX), 8N1; baud = clk_peri / (16 × (IBRD + FBRD / 64)). */
#define BAUD 3000000u
static void uart_init(void) {
    unreset(RST_UART0);
    uint32_t div = (8u * SYS_HZ) / BAUD; /* 64 × clk/(16 baud), ×2 for rounding */
    REG(UART_IBRD) = div >> 7;
    REG(UART_FBRD) = ((div & 0x7Fu) + 1u) / 2u;
    REG(UART_LCR_H) = (3u << 5) | (1u << 4); /* 8 bits, FIFOs on */
    REG(UART_CR) = (1u << 0) | (1u << 8) | (1u << 9);
    REG(GPIO_CTRL(0)) = FUNC_UART;
    REG(GPIO_CTRL(1)) = FUNC_UART;
    REG(PADS_GPIO(1)) = PAD_IE | PAD_SCHMITT | PAD_PUE;
}

/* The phase timer. Two instructions per count in each loop, and four cycles from an edge's
 * detection to the first sample of the next phase on both edges (the wrap is free), so a
 * phase of n counts lasted n + 2 ticks on either edge. High counts are pushed as ~X (small),
 * low counts as Y itself (top bit set): the core tells them apart, so a lost word cannot swap
 * the phases unnoticed. It starts by waiting for a low level, so a clock already running when
 * streaming starts gives no made-up first rise. Encodings: data sheet 3.4 (JMP 000, WAIT 001,
 * MOV 101, PUSH 100). */
static const uint16_t phase_prog[] = {
    0x0041, /* 0 hcount: jmp x-- hcheck   count a high sample       */
    0x00C0, /* 1 hcheck: jmp pin hcount   still high?               */
    0xA0C9, /* 2         mov isr, ~x      fell: the high count      */
    0x8020, /* 3         push block                                 */
    0xA04B, /* 4         mov y, ~null                               */
    0x00C7, /* 5 lcheck: jmp pin rose     risen?                    */
    0x0085, /* 6         jmp y-- lcheck   count a low sample        */
    0xA0C2, /* 7 rose:   mov isr, y       the low count (top bit 1) */
    0x8020, /* 8         push block                                 */
    0xA02B, /* 9         mov x, ~null     wrap to 1                 */
    0x2000 | CLK_PIN, /* 10 start: wait 0 gpio CLK   a clock high at start is no rise */
    0x0005, /* 11        jmp lcheck                                 */
};
#define PROG_WRAP_TOP 9u
#define PROG_WRAP_BOTTOM 1u
#define PROG_ENTRY 10u /* wait for a low level, then the low loop: the first rise is exact */

/* DMA ring of phase words: 2^RING_BITS bytes, aligned to its size (data sheet 2.5.2). */
#define RING_BITS 14
#define RING_WORDS (1u << (RING_BITS - 2))
#define RING_MASK (RING_WORDS - 1u)
static volatile uint32_t ring[RING_WORDS] __attribute__((aligned(1u << RING_BITS)));
#define DMA_RUN 0xFFFFFFFFu

static void pio_init(void) {
    unreset(RST_IO_BANK0 | RST_PADS_BANK0 | RST_PIO0 | RST_DMA | RST_TIMER);
    REG(PADS_GPIO(CLK_PIN)) = PAD_IE | PAD_SCHMITT; /* input enabled, no pulls */
    REG(GPIO_CTRL(CLK_PIN)) = FUNC_PIO0;
    for (uint32_t i = 0; i < sizeof phase_prog / sizeof phase_prog[0]; i++)
        REG(PIO_INSTR_MEM(i)) = phase_prog[i];
}

static void pio_stop(void) {
    REG(PIO_CTRL) = 0;
    REG(DMA_CTRL(0)) = 0; /* EN off, no trigger */
    REG(DMA_CHAN_ABORT) = 1u; /* BUSY clears once the abort is done */
    while (REG(DMA_CTRL(0)) & DMA_BUSY) {
    }
}

static void pio_start(void) {
    pio_stop();
    REG(PIO_SM0_CLKDIV) = 1u << 16; /* full speed */
    REG(PIO_SM0_EXECCTRL) = (CLK_PIN << 24) | (PROG_WRAP_TOP << 12) | (PROG_WRAP_BOTTOM << 7);
    REG(PIO_SM0_SHIFTCTRL) = 0; /* no autopush, shift left, 4 + 4 FIFOs */
    REG(PIO_SM0_PINCTRL) = CLK_PIN << 15; /* IN_BASE */
    REG(PIO_CTRL) = (1u << 4) | (1u << 8); /* restart SM0 and its clock divider */
    while (!(REG(PIO_FSTAT) & (1u << 8))) (void)REG(PIO_RXF0); /* empty RX FIFO 0 */
    REG(PIO_FDEBUG) = PIO_FDEBUG_RXSTALL0;
    REG(PIO_SM0_INSTR) = 0xA04B;     /* mov y, ~null */
    REG(PIO_SM0_INSTR) = PROG_ENTRY; /* jmp start */
    REG(DMA_READ_ADDR(0)) = PIO_RXF0;
    REG(DMA_WRITE_ADDR(0)) = (uint32_t)(uintptr_t)ring;
    REG(DMA_TRANS_COUNT(0)) = DMA_RUN;
    REG(DMA_CTRL_TRIG(0)) = DMA_EN | DMA_SIZE_WORD | DMA_INCR_WRITE | DMA_RING_SIZE(RING_BITS) |
                            DMA_RING_WRITE | DMA_CHAIN_TO(0) | DMA_TREQ(DREQ_PIO0_RX0) |
                            DMA_IRQ_QUIET;
    REG(PIO_CTRL) = 1u; /* enable SM0 */
}

/* Words the DMA has moved since pio_start (mod 2^32). */
static inline uint32_t ring_produced(void) { return DMA_RUN - REG(DMA_TRANS_COUNT(0)); }

/* Probe ticks (16 ns) from the 1 µs TIMER: the coarse clock of windows and STATUS. */
static uint64_t now_ticks(void) {
    uint32_t hi, lo;
    do {
        hi = REG(TIMER_RAWH);
        lo = REG(TIMER_RAWL);
    } while (hi != REG(TIMER_RAWH));
    uint64_t us = ((uint64_t)hi << 32) | lo;
    return us * (TICK_HZ / 500000u) / 2u; /* 62.5 ticks per µs */
}

/* ---------------------------------------------------------------- transmit */

#define TXQ 16384u
static uint8_t txq[TXQ];
static uint32_t tx_head, tx_tail; /* free-running indices */
static uint8_t fb[PROTO_MAX_FRAME];
#define BODY (fb + PROTO_HEADER)
static uint16_t tx_seq;
static uint32_t frames_sent, edges_dropped;
static uint16_t overflows, rx_bad;

static uint32_t tx_free(void) { return TXQ - (tx_head - tx_tail); }

static void tx_drain(void) {
    while (tx_tail != tx_head && !(REG(UART_FR) & UART_FR_TXFF)) REG(UART_DR) = txq[tx_tail++ % TXQ];
}

/* CRC-32/ISO-HDLC a byte at a time: a 1 KiB table in SRAM built at start-up from the
 * reflected polynomial 0xEDB88320 (PROTOCOL.md section 2), about four times faster than the
 * nibble table of ../avr/proto.c that the AVR's flash favours. */
static uint32_t crc_table[256];

static void crc_init(void) {
    for (uint32_t i = 0; i < 256; i++) {
        uint32_t c = i;
        for (int k = 0; k < 8; k++) c = (c & 1u) ? 0xEDB88320u ^ (c >> 1) : c >> 1;
        crc_table[i] = c;
    }
}

static uint32_t crc32(const uint8_t *p, uint32_t n) {
    uint32_t c = 0xFFFFFFFFu;
    while (n--) c = crc_table[(c ^ *p++) & 0xFFu] ^ (c >> 8);
    return c ^ 0xFFFFFFFFu;
}

/* COBS (PROTOCOL.md section 2) of p[0..n) straight into the transmit queue, then the 0x00
 * delimiter; the caller has checked the room (n + n / 254 + 2 bytes). */
static void cobs_queue(const uint8_t *p, uint32_t n) {
    uint32_t h = tx_head;
    uint32_t code_at = h++;
    uint8_t code = 1;
    for (uint32_t i = 0; i < n; i++) {
        uint8_t b = p[i];
        if (b != 0) {
            txq[h++ % TXQ] = b;
            if (++code != 0xFF) continue;
        }
        txq[code_at % TXQ] = code; /* a zero, or a full block of 254 */
        code_at = h++;
        code = 1;
    }
    txq[code_at % TXQ] = code;
    txq[h++ % TXQ] = 0;
    tx_head = h;
}

/* Frame, CRC and COBS-encode the body in fb into the transmit queue; false (nothing queued, the
 * sequence number not used) when the queue lacks room for the worst case. */
static bool send_frame(uint8_t type, uint16_t body_len) {
    uint16_t n = PROTO_HEADER + body_len;
    if (tx_free() < (uint32_t)n + PROTO_CRC + n / 254u + 3u) {
        tx_drain();
        if (tx_free() < (uint32_t)n + PROTO_CRC + n / 254u + 3u) return false;
    }
    fb[0] = PROTO_VERSION;
    fb[1] = type;
    proto_put16(fb + 2, tx_seq++);
    proto_put32(fb + n, crc32(fb, n));
    cobs_queue(fb, n + PROTO_CRC);
    frames_sent++;
    tx_drain();
    return true;
}

/* Frames that must not be dropped (answers) wait for room. */
static void send_frame_wait(uint8_t type, uint16_t body_len) {
    while (!send_frame(type, body_len)) tx_drain();
}

static uint8_t put_text(uint8_t *p, const char *s) {
    uint8_t n = 0;
    while (s[n]) {
        p[1 + n] = (uint8_t)s[n];
        n++;
    }
    p[0] = n;
    return (uint8_t)(n + 1);
}

/* ---------------------------------------------------------------- settings and state */

static uint8_t edge_mode = MODE_EXTREMES;
static bool clk_enabled = true;
static uint32_t window_ticks = TICK_HZ / 100u; /* 10 ms */
static uint32_t thr_high, thr_low;
static uint16_t status_ms = 1000;
static bool streaming;

static void send_hello(void) {
    uint8_t *p = BODY;
    p[0] = PROTO_VERSION;
    p[1] = 3; /* extremes class */
    proto_put64(p + 2, TICK_HZ);
    proto_put32(p + 10, 1);
    proto_put16(p + 14, TIMEBASE_PPM);
    proto_put32(p + 16, MAX_EDGE_KHZ);
    uint16_t o = 20;
    o += put_text(p + o, FIRMWARE_ID);
    p[o++] = 1; /* channels */
    p[o++] = CH_CLK;
    p[o++] = 1;               /* edge input */
    p[o++] = 1u | 8u | 16u;   /* timestamps, window extremes, threshold counts */
    o += put_text(p + o, "CLK");
    send_frame_wait(MSG_HELLO, o);
}

static void send_ack(uint16_t seq, uint8_t cmd, uint8_t result, uint32_t value) {
    proto_put16(BODY, seq);
    BODY[2] = cmd;
    BODY[3] = result;
    proto_put32(BODY + 4, value);
    send_frame_wait(MSG_ACK, 8);
}

static void send_log(uint8_t level, const char *text) {
    BODY[0] = level;
    uint8_t n = put_text(BODY + 1, text);
    (void)send_frame(MSG_LOG, (uint16_t)(1 + n));
}

static void send_status(void) {
    uint8_t *p = BODY;
    proto_put64(p, now_ticks());
    proto_put32(p + 8, frames_sent);
    proto_put32(p + 12, edges_dropped);
    proto_put32(p + 16, 0);
    proto_put16(p + 20, overflows);
    proto_put16(p + 22, rx_bad);
    p[24] = (uint8_t)((TXQ - tx_free()) * 100u / TXQ);
    p[25] = streaming ? 1 : 0;
    (void)send_frame(MSG_STATUS, 26);
}

/* ---------------------------------------------------------------- edge stamps (EDGES) */

/* The batch being filled lives in its own buffer; it is copied into fb when sent. */
#define EB_MAX_BODY 1000u
#define EB_AGE_TICKS (TICK_HZ / 20u) /* a batch of a slow clock waits at most 50 ms */
static uint8_t eb[EB_MAX_BODY + 16];
static uint16_t eb_len, eb_n;
static uint64_t eb_first, eb_last;
static bool eb_on;           /* collecting a batch now */
static uint8_t eb_flags;     /* flags of the next batch */

static void eb_send(void) {
    if (eb_n == 0) return;
    proto_put16(eb + 3, eb_n);
    for (uint16_t i = 0; i < eb_len; i++) BODY[i] = eb[i];
    if (!send_frame(MSG_EDGES, eb_len)) { /* other frames took the room kept for it */
        eb_flags |= FLAG_LOST;
        edges_dropped += eb_n;
        overflows++;
    }
    eb_n = 0;
    eb_on = false;
}

/* One edge at tick t; `level` is the level after it. */
static inline void eb_edge(uint64_t t, uint8_t level) {
    if (!eb_on) {
        /* start a batch only when the link can take it; the edges skipped meanwhile are
         * sampling by design, flagged as a burst start */
        if (tx_free() < EB_MAX_BODY + 64u) {
            eb_flags |= FLAG_BURST;
            return;
        }
        eb[0] = CH_CLK;
        eb[1] = level;
        eb[2] = eb_flags;
        eb_flags = 0;
        proto_put64(eb + 5, t);
        eb_len = 13;
        eb_n = 1;
        eb_first = eb_last = t;
        eb_on = true;
        return;
    }
    eb_len += proto_leb128_put(eb + eb_len, t - eb_last);
    eb_last = t;
    eb_n++;
    if (eb_len > EB_MAX_BODY - 10u) eb_send();
}

/* ---------------------------------------------------------------- windows (EXTREMES) */

#define BINS 16u
#define STAMPS 8u
typedef struct {
    uint32_t cycles, hmin, hmax, lmin, lmax, pmin, pmax;
    uint32_t hsum, lsum; /* a window of at most 2^26 ticks: no carry */
    uint32_t hist[BINS];
    uint32_t hshort, lshort;
    uint8_t nstamps;
    uint8_t stamp[STAMPS][13];
} window_t;

static window_t win;
static uint64_t win_start;    /* the window being filled, on the edge timeline */
static bool win_open;
static bool win_bad;          /* words were lost in this window: it is not sent */
static uint8_t win_flags;     /* flags of the next window sent */
static uint32_t bin_origin, bin_shift = 31; /* bins of the window being filled */
static bool bins_on;

static void win_clear(void) {
    win.cycles = 0;
    win.hmin = win.lmin = win.pmin = 0xFFFFFFFFu;
    win.hmax = win.lmax = win.pmax = 0;
    win.hsum = win.lsum = 0;
    for (uint32_t i = 0; i < BINS; i++) win.hist[i] = 0;
    win.hshort = win.lshort = 0;
    win.nstamps = 0;
}

/* Bins for the next window from this one's periods: 16 bins of a power-of-two width spanning
 * them with a bin to spare on each side. */
static void bins_next(void) {
    if (win.cycles == 0) return;
    uint32_t span = win.pmax - win.pmin + 1u;
    uint32_t s = 0;
    while ((((uint32_t)BINS - 2u) << s) < span && s < 28) s++;
    bin_shift = s;
    uint32_t w = 1u << s;
    bin_origin = win.pmin > w ? win.pmin - w : 0;
    bins_on = true;
}

static void win_emit(void) {
    uint8_t *p = BODY;
    bool any = win.cycles > 0;
    p[0] = CH_CLK;
    p[1] = win_flags;
    proto_put64(p + 2, win_start);
    proto_put32(p + 10, window_ticks);
    proto_put32(p + 14, win.cycles);
    proto_put32(p + 18, any ? win.hmin : 0);
    proto_put32(p + 22, win.hmax);
    proto_put32(p + 26, any ? win.lmin : 0);
    proto_put32(p + 30, win.lmax);
    proto_put32(p + 34, any ? win.pmin : 0);
    proto_put32(p + 38, win.pmax);
    proto_put64(p + 42, win.hsum);
    proto_put64(p + 50, win.lsum);
    uint16_t o = 58;
    if (bins_on) {
        proto_put32(p + o, bin_origin);
        proto_put32(p + o + 4, 1u << bin_shift);
        p[o + 8] = BINS;
        o += 9;
        for (uint32_t i = 0; i < BINS; i++, o += 4) proto_put32(p + o, win.hist[i]);
    } else {
        proto_put32(p + o, 0);
        proto_put32(p + o + 4, 0);
        p[o + 8] = 0;
        o += 9;
    }
    bool sent = send_frame(MSG_EXTREMES, o);
    if (sent && (thr_high || thr_low)) {
        p[0] = CH_CLK;
        p[1] = win_flags;
        proto_put64(p + 2, win_start);
        proto_put32(p + 10, window_ticks);
        proto_put32(p + 14, thr_high);
        proto_put32(p + 18, thr_low);
        proto_put32(p + 22, win.hshort);
        proto_put32(p + 26, win.lshort);
        p[30] = win.nstamps;
        o = 31;
        for (uint32_t i = 0; i < win.nstamps; i++)
            for (uint32_t k = 0; k < 13; k++) p[o++] = win.stamp[i][k];
        sent = send_frame(MSG_VIOLATIONS, o);
    }
    win_flags = sent ? 0 : FLAG_LOST;
    if (!sent) overflows++;
}

/* Close the window being filled (send it unless words were lost in it) and open the next. */
static void win_close(void) {
    if (win_bad) {
        win_flags = FLAG_LOST;
        win_bad = false;
    } else if (edge_mode != MODE_STAMPS) {
        win_emit();
    }
    bins_next();
    win_clear();
    win_start += window_ticks;
}


/* ---------------------------------------------------------------- the phase stream */

static uint32_t consumed;   /* words taken from the ring */
static bool synced;         /* the last low word's rise was exact: the timeline is on */
static int32_t rel;         /* tick of the last rise, from win_start (< window_ticks) */
static uint32_t high_ticks; /* the high phase after that rise, once its fall was seen */
static bool have_high;
static bool lost_warned;

/* The windows a closing rise `r1` ticks after win_start lies beyond: closed, rel re-based. */
static void __attribute__((noinline)) close_through(int64_t r1) {
    while (r1 >= (int64_t)window_ticks) {
        win_close();
        r1 -= window_ticks;
    }
    rel = (int32_t)r1;
}

/* A short phase stamped (the edge that opened it, its length, 1 high / 0 low). */
static void __attribute__((noinline)) stamp(uint64_t t, uint32_t len, uint8_t phase) {
    if (win.nstamps >= STAMPS) return;
    uint8_t *s = win.stamp[win.nstamps++];
    proto_put64(s, t);
    proto_put32(s + 8, len);
    s[12] = phase;
}

/* One whole cycle: high h from the last rise, then low l, closed by the next rise. */
static inline void cycle(uint32_t h, uint32_t l) {
    uint32_t p = h + l;
    bool sh = h < thr_high, sl = l < thr_low;
    uint64_t r0 = 0;
    if (sh | sl) r0 = win_start + (uint64_t)(int64_t)rel;
    int64_t r1 = (int64_t)rel + p;
    if (r1 >= (int64_t)window_ticks) close_through(r1);
    else rel = (int32_t)r1;
    window_t *w = &win;
    w->cycles++;
    if (h < w->hmin) w->hmin = h;
    if (h > w->hmax) w->hmax = h;
    if (l < w->lmin) w->lmin = l;
    if (l > w->lmax) w->lmax = l;
    if (p < w->pmin) w->pmin = p;
    if (p > w->pmax) w->pmax = p;
    w->hsum += h;
    w->lsum += l;
    uint32_t b = p > bin_origin ? (p - bin_origin) >> bin_shift : 0;
    w->hist[b < BINS ? b : BINS - 1u]++;
    if (sh | sl) {
        if (sh) w->hshort++, stamp(r0, h, 1);
        if (sl) w->lshort++, stamp(r0 + h, l, 0);
    }
}

/* Words were lost (ring overrun or a phase out of turn): start again at the newest word. */
static void resync(uint32_t produced) {
    edges_dropped += produced - consumed;
    overflows++;
    consumed = produced;
    synced = false;
    have_high = false;
    win_bad = win_open;
    if (eb_on) eb_send();
    eb_flags |= FLAG_LOST;
}

/* The first exact rise after a start or a loss: the timeline follows the TIMER from here. */
static void sync_at(uint64_t t) {
    synced = true;
    if (!win_open) {
        win_open = true;
        win_start = t;
        win_clear();
        rel = 0;
        return;
    }
    /* after a loss: the windows up to and including this rise's are partial */
    int64_t r = (int64_t)(t - win_start);
    while (r >= (int64_t)window_ticks) {
        win_bad = true;
        win_close();
        r -= window_ticks;
    }
    win_bad = true;
    rel = (int32_t)r;
}

/* The fast path's bounds: a cycle whose high time lies in [hlo, hlo + hspan], low time in
 * [llo, llo + lspan] and period in [plo, plo + pspan] changes no extreme, is no violation
 * (hlo is the larger of the window's shortest high time and the high threshold, so a shorter
 * one takes the full path) and falls into one of the histogram's bins (the period range is
 * clipped to the bins), so only its sums and its bin are added. Unsigned differences make each
 * range one comparison. */
typedef struct {
    uint32_t hlo, hspan, llo, lspan, plo, pspan;
} bounds_t;
static bounds_t fast;

static void bounds(void) {
    bounds_t b;
    b.hlo = win.hmin > thr_high ? win.hmin : thr_high;
    b.hspan = win.hmax >= b.hlo ? win.hmax - b.hlo : 0;
    b.llo = win.lmin > thr_low ? win.lmin : thr_low;
    b.lspan = win.lmax >= b.llo ? win.lmax - b.llo : 0;
    uint32_t lo = win.pmin, hi = win.pmax;
    if (bins_on) {
        uint64_t top = (uint64_t)bin_origin + ((uint64_t)BINS << bin_shift) - 1u;
        if (lo < bin_origin) lo = bin_origin;
        if ((uint64_t)hi > top) hi = (uint32_t)top;
    }
    b.plo = lo;
    b.pspan = hi >= lo ? hi - lo : 0;
    if (win.cycles == 0 || hi < lo) b.plo = 0xFFFFFFFFu, b.pspan = 0;
    if (win.cycles == 0) b.hlo = b.llo = 0xFFFFFFFFu, b.hspan = b.lspan = 0;
    fast = b;
}

/* The tight loop: up to `pairs` whole cycles at q (a high word, then a low word) that stay
 * within the bounds and the window; returns how many it took, added to the window. */
static uint32_t __attribute__((noinline)) fast_pairs(const uint32_t *q, uint32_t pairs) {
    const uint32_t *const q0 = q, *const qe = q + 2u * pairs;
    const uint32_t hlo = fast.hlo, hspan = fast.hspan, llo = fast.llo, lspan = fast.lspan;
    const uint32_t plo = fast.plo, pspan = fast.pspan;
    const uint32_t org = bin_origin, sh = bin_shift;
    uint32_t *const hist = win.hist;
    const uint32_t left0 = window_ticks - (uint32_t)rel; /* ticks to the end of the window */
    uint32_t left = left0, hs = 0;
    while (q != qe) {
        uint32_t wh = q[0], wl = q[1];
        uint32_t h = wh + 2u, l = ~wl + 2u, p = h + l;
        if ((int32_t)(wl & ~wh) >= 0 || h - hlo > hspan || l - llo > lspan || p - plo > pspan ||
            p >= left)
            break;
        q += 2;
        left -= p;
        hs += h;
        hist[(p - org) >> sh]++;
    }
    uint32_t n = (uint32_t)(q - q0) / 2u;
    win.cycles += n;
    win.hsum += hs;
    win.lsum += (left0 - left) - hs; /* the periods add up to the time taken */
    rel = (int32_t)(window_ticks - left);
    return n;
}

/* Whole cycles from ring index i up to end, in extremes mode; returns the index reached: it
 * stops early at a pair out of turn (the caller resyncs) or one word before the ring's wrap
 * (the caller takes that word alone). */
static uint32_t __attribute__((noinline)) take_cycles(uint32_t i, uint32_t end) {
    const uint32_t *rb = (const uint32_t *)(uintptr_t)ring;
    bounds();
    while (end - i >= 2u) {
        uint32_t at = i & RING_MASK;
        if (at == RING_MASK) return i; /* a pair across the wrap */
        uint32_t pairs = (end - i) / 2u, room = (RING_WORDS - at) / 2u;
        uint32_t done = fast_pairs(rb + at, pairs < room ? pairs : room);
        i += 2u * done;
        if (done == (pairs < room ? pairs : room)) continue;
        /* the pair at i takes the full path, or is out of turn */
        uint32_t wh = rb[at + 2u * done], wl = rb[at + 2u * done + 1u];
        if ((int32_t)(wl & ~wh) >= 0) return i;
        cycle(wh + 2u, ~wl + 2u);
        bounds();
        i += 2u;
    }
    return i;
}

static void __attribute__((noinline)) take_words(void) {
    uint32_t produced = ring_produced();
    __asm__ volatile("" ::: "memory"); /* the ring's words up to `produced` are read after it */
    if (produced - consumed > RING_WORDS - 8u) resync(produced);
    uint32_t n = produced - consumed;
    if (n > 2048u) n = 2048u;
    bool stamps = edge_mode == MODE_STAMPS || edge_mode == MODE_BOTH;
    uint32_t i = consumed;
    uint32_t end = i + n;
    while (i != end) {
        if (synced && !have_high && !stamps) {
            i = take_cycles(i, end);
            if (i == end) break;
        }
        uint32_t w = ring[i & RING_MASK];
        i++;
        bool low = (w >> 31) != 0;
        if (!synced) {
            if (low) sync_at(now_ticks());
            continue;
        }
        if (!low) {
            if (have_high) { /* two highs in a row: a word went missing */
                consumed = i;
                resync(produced);
                return;
            }
            high_ticks = w + 2u;
            have_high = true;
            if (stamps) eb_edge(win_start + (uint64_t)((int64_t)rel + high_ticks), 0);
        } else {
            if (!have_high) {
                consumed = i;
                resync(produced);
                return;
            }
            have_high = false;
            cycle(high_ticks, ~w + 2u);
            if (stamps) eb_edge(win_start + (uint64_t)(int64_t)rel, 1);
        }
    }
    consumed = i;
}

static void streaming_set(bool on) {
    pio_stop();
    streaming = on;
    consumed = 0;
    synced = have_high = false;
    win_open = win_bad = false;
    win_flags = 0;
    bins_on = false;
    eb_on = false;
    eb_n = 0;
    eb_flags = FLAG_BURST;
    lost_warned = false;
    if (on && clk_enabled) pio_start();
}

/* ---------------------------------------------------------------- host commands */

static void configure(uint16_t seq, uint8_t ch, uint8_t param, uint32_t value) {
    uint8_t r = ACK_OK;
    uint32_t in_force = value;
    bool all = ch == 0xFF;
    if (!all && ch != CH_CLK) {
        send_ack(seq, MSG_CONFIGURE, ACK_BAD_CHANNEL, 0);
        return;
    }
    switch (param) {
    case CFG_ENABLE:
        if (all) r = ACK_BAD_CHANNEL;
        else if (value > 1) r = ACK_BAD_VALUE, in_force = clk_enabled;
        else clk_enabled = value != 0;
        break;
    case CFG_EDGE_MODE:
        if (value != MODE_STAMPS && value != MODE_BOTH && value != MODE_EXTREMES)
            r = ACK_BAD_VALUE, in_force = edge_mode;
        else edge_mode = (uint8_t)value;
        break;
    case CFG_STATUS_INTERVAL:
        if (!all) r = ACK_BAD_CHANNEL;
        else if (value < 100 || value > 60000u) r = ACK_BAD_VALUE, in_force = status_ms;
        else status_ms = (uint16_t)value;
        break;
    case CFG_HIGH_THRESHOLD:
    case CFG_LOW_THRESHOLD:
        if (all) r = ACK_BAD_CHANNEL;
        else if (value > window_ticks) r = ACK_BAD_VALUE, in_force = param == CFG_HIGH_THRESHOLD ? thr_high : thr_low;
        else if (param == CFG_HIGH_THRESHOLD) thr_high = value;
        else thr_low = value;
        break;
    case CFG_WINDOW:
        if (value < TICK_HZ / 10000u || value > TICK_HZ) r = ACK_BAD_VALUE, in_force = window_ticks;
        else window_ticks = value;
        break;
    default:
        r = ACK_BAD_PARAM;
    }
    if (r == ACK_BAD_CHANNEL || r == ACK_BAD_PARAM) in_force = 0;
    if (r == ACK_OK && streaming) streaming_set(true); /* fresh windows and batches */
    send_ack(seq, MSG_CONFIGURE, r, in_force);
}

static void handle_frame(const uint8_t *f, int16_t n) {
    if (n < 8 || crc32(f, (uint32_t)(n - 4)) != proto_get32(f + n - 4)) {
        rx_bad++;
        send_ack(0xFFFF, 0, ACK_BAD_FRAME, 0);
        return;
    }
    uint16_t seq = proto_get16(f + 2);
    uint8_t type = f[1];
    const uint8_t *body = f + 4;
    uint16_t len = (uint16_t)(n - 8);
    if (f[0] != PROTO_VERSION) {
        send_ack(seq, type, ACK_BAD_VERSION, 0);
        return;
    }
    switch (type) {
    case MSG_DESCRIBE:
        send_hello();
        break;
    case MSG_START:
        streaming_set(true);
        send_ack(seq, type, ACK_OK, 0);
        break;
    case MSG_STOP:
        if (eb_on) eb_send();
        streaming_set(false);
        send_ack(seq, type, ACK_OK, 0);
        break;
    case MSG_PING:
        if (len != 4) send_ack(seq, type, ACK_BAD_PARAM, 0);
        else send_ack(seq, type, ACK_OK, proto_get32(body));
        break;
    case MSG_CONFIGURE:
        if (len != 6) send_ack(seq, type, ACK_BAD_PARAM, 0);
        else configure(seq, body[0], body[1], proto_get32(body + 2));
        break;
    default:
        send_ack(seq, type, ACK_UNKNOWN, 0);
    }
}

#define RX_RAW 64u
static uint8_t rx_raw[RX_RAW], rx_dec[RX_RAW];
static uint8_t rx_len;
static bool rx_overlong;

static void poll_rx(void) {
    while (!(REG(UART_FR) & UART_FR_RXFE)) {
        uint8_t b = (uint8_t)REG(UART_DR);
        if (b != 0) {
            if (rx_len < RX_RAW) rx_raw[rx_len++] = b;
            else rx_overlong = true;
            continue;
        }
        if (rx_overlong) {
            rx_bad++;
            send_ack(0xFFFF, 0, ACK_BAD_FRAME, 0);
        } else if (rx_len > 0) {
            int16_t n = proto_cobs_decode(rx_raw, rx_len, rx_dec, RX_RAW);
            if (n < 0) {
                rx_bad++;
                send_ack(0xFFFF, 0, ACK_BAD_FRAME, 0);
            } else {
                handle_frame(rx_dec, n);
            }
        }
        rx_len = 0;
        rx_overlong = false;
    }
}

/* ---------------------------------------------------------------- main loop */

#define IDLE_SLACK_TICKS 125u /* 2 µs: a rise before this is in the ring by now */

int main(void) {
    crc_init();
    clocks_init();
    pio_init();
    uart_init();
    send_hello();
    uint64_t next_status = now_ticks();
    for (;;) {
        poll_rx();
        tx_drain();
        if (!streaming) continue;
        take_words();
        uint64_t t = now_ticks();
        /* windows of a slow or stopped clock close on the TIMER once the ring is empty */
        if (synced && consumed == ring_produced())
            while (t > win_start + window_ticks + IDLE_SLACK_TICKS) {
                win_close();
                rel = rel > INT32_MIN / 2 ? rel - (int32_t)window_ticks : rel;
            }
        if (eb_on && t - eb_first > EB_AGE_TICKS) eb_send();
        if (!lost_warned && edges_dropped) { /* once per start */
            lost_warned = true;
            send_log(1, "phase words lost: clock too fast for every cycle, windows skipped");
        }
        if (t >= next_status) {
            send_status();
            next_status = t + (uint64_t)status_ms * (TICK_HZ / 1000u);
        }
    }
}
