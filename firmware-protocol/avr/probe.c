/* slackmeter reference probe firmware for an ATmega328P at 16 MHz (protocol version 1).
 *
 * Timer1 runs free at the CPU clock: it is the 62.5 ns tick (extended to 64 bits by its overflow
 * interrupt), it stamps clock edges by input capture, and its two compare units schedule the
 * ADC slots (compare B); Timer2 times the pseudo-random level samples. Timer0 counts the clock on T0 for gated
 * count windows and, in CTC mode, divides it by M onto OC0A, whose edges the analog comparator
 * hands to Timer1's input capture for reciprocal counting. Pin map and limits: WIRING.md and
 * FIRMWARE.md. The host computes every figure; the probe reports raw ticks and counts. */
#include <avr/eeprom.h>
#include <avr/interrupt.h>
#include <avr/io.h>
#include <avr/pgmspace.h>
#include <stdbool.h>
#include <string.h>

#include "proto.h"

#ifndef TIMEBASE_PPM
#define TIMEBASE_PPM 5000 /* ceramic resonator boards; build with TIMEBASE_PPM=50 for a crystal */
#endif
#define TICK_HZ 16000000UL
#define FIRMWARE_ID "slackmeter-avr328p 1.0"

/* channel ids (HELLO) */
#define CH_CLK 0   /* PB0/ICP1: timestamps, reciprocal count windows, level sampling */
#define CH_GATED 1 /* PD4/T0: gated count windows */
#define CH_RESET 2 /* PD2/INT0 */
#define CH_FAULT 3 /* PD3/INT1 */
#define CH_HEART 4 /* PB1/PCINT1 */
#define CH_RAIL0 8 /* ADC0..ADC3 are channels 8..11 */
#define RAILS 4

#define MODE_STAMPS 0
#define MODE_COUNT 1
#define MODE_BOTH 2

#define EB_N 96 /* stamps per edge batch; two batches alternate */
#define AN_N 16  /* samples per analog batch; two batches per rail alternate */
#define LN_N 16  /* queued line events */
#define FB_MAX 320
#define RX_RAW 40

/* ticks per ADC slot: one conversion (13 ADC clocks of 128 ticks; 25 for the first) fits */
#define MIN_SLOT 3400

/* Buffers shared with interrupts are plain memory: reload them after every hand-over. */
#define BARRIER() __asm__ __volatile__("" ::: "memory")

/* a stamp batch of a slow or stopped clock is sent when its first edge is this old (100 ms),
 * whatever the count-window gate */
#define EB_AGE_TICKS 1600000UL

#define FLAG_LOST 1
#define FLAG_BURST 2

/* ---------------------------------------------------------------- timebase */

static volatile uint32_t t1_high; /* Timer1 overflows, low 32 bits */
static volatile uint16_t t1_top;  /* and the 16 bits above them: ticks carry to 64 bits */

ISR(TIMER1_OVF_vect) {
    if (++t1_high == 0) t1_top++;
}


/* 64-bit tick from a 16-bit Timer1 value read with interrupts off. */
static uint64_t extend(uint16_t low) {
    union {
        uint64_t t;
        struct {
            uint16_t low;
            uint32_t high;
            uint16_t top;
        } w;
    } u; /* assembled in place: a 64-bit shift costs a hundred cycles on this core */
    u.w.low = low;
    u.w.high = t1_high;
    u.w.top = t1_top;
    if ((TIFR1 & _BV(TOV1)) && low < 0x8000 && ++u.w.high == 0) u.w.top++;
    return u.t;
}

static uint64_t now_ticks(void) {
    uint8_t s = SREG;
    cli();
    uint64_t t = extend(TCNT1);
    SREG = s;
    return t;
}

/* ---------------------------------------------------------------- settings (EEPROM-backed) */

typedef struct {
    uint16_t magic;
    int32_t scale_num_uv[RAILS];
    int32_t offset_uv[RAILS];
} cal_t;

#define CAL_MAGIC 0x5C01
#define SCALE_DEN 1000UL
/* µV at the rail per count ×1000: 1.1 V / 1024 through the (47k + 9.1k) / 9.1k divider */
#define DEFAULT_SCALE 6622417L

static cal_t cal;
static cal_t EEMEM cal_ee;

static uint8_t edge_mode = MODE_COUNT;
static uint32_t gate_ticks = 1600000UL;  /* 100 ms */
static uint32_t rail_interval = 16000UL; /* per-channel sample interval, 1 ms */
static uint32_t duty_cap = 0xFFFFFFFFUL; /* level samples per window */
static uint16_t status_ms = 1000;
static uint8_t enabled = 0xFF; /* bit per channel 0..4; rails in bits 8..11 of rail_en */
static uint8_t rail_en = 0x0F;
static bool streaming;

/* ---------------------------------------------------------------- counters */

static uint32_t frames_sent, edges_dropped, samples_dropped;
static uint16_t overflows, rx_bad;

/* ---------------------------------------------------------------- edge timestamps */

typedef struct {
    uint64_t first;
    uint16_t n;
    uint8_t first_level;
    uint8_t flags;
    uint16_t d[EB_N - 1];
} ebuf_t;

static ebuf_t eb[2];
static volatile uint8_t eb_fill;     /* batch being filled */
static volatile uint8_t eb_ready[2]; /* closed, waiting to be sent */
static uint8_t eb_pending;           /* flags for the next batch */

/* reciprocal counting: captures of the divided clock */
static volatile uint16_t rc_n;
static uint64_t rc_first, rc_last;
static bool recip;         /* input capture listens to the comparator */

static uint8_t t0_at_rise; /* TCNT0 expected after the last stamped rising edge */
static bool t0_sync;       /* t0_at_rise is set (from the first stamped rise) */

static void eb_close(void) {
    eb_ready[eb_fill] = 1;
    eb_fill ^= 1;
}

static uint16_t cap_icr;         /* ICR1 at the previous capture */
static uint32_t cap_high;        /* Timer1 overflows then */
static uint32_t cap_lo, cap_hi;  /* its 64-bit tick, counted on in 16-bit steps */

static uint64_t make64(uint32_t hi, uint32_t lo) {
    union {
        uint64_t t;
        uint32_t w[2];
    } u;
    u.w[0] = lo;
    u.w[1] = hi;
    return u.t;
}

/* Advance the capture clock to this ICR1 value; returns the ticks since the previous capture,
 * or 0 when a wrap or more went by (then the tick is re-extended from the overflow count).
 * Counting on in 16 bits keeps the interrupt short, and it stays continuous under simavr 1.6,
 * which loses Timer1 overflows while TCCR1B is rewritten (FIRMWARE.md). */
static uint16_t cap_advance(uint16_t icr) {
    uint32_t h = t1_high;
    uint16_t top = t1_top;
    if ((TIFR1 & _BV(TOV1)) && icr < 0x8000 && ++h == 0) top++;
    uint16_t d = (uint16_t)(icr - cap_icr);
    bool near = d != 0 && (h == cap_high || (h == cap_high + 1 && icr < cap_icr));
    if (near) {
        uint32_t lo = cap_lo + d;
        if (lo < cap_lo) cap_hi++;
        cap_lo = lo;
    } else {
        cap_lo = (h << 16) | icr;
        cap_hi = ((uint32_t)top << 16) | (h >> 16);
        d = 0;
    }
    cap_icr = icr;
    cap_high = h;
    return d;
}

/* One stamp, `d` ticks after the previous capture (0: not continuous). */
static void eb_push(uint16_t d, uint8_t level) {
    ebuf_t *b = &eb[eb_fill];
    if (eb_ready[eb_fill]) {
        /* both batches wait for the UART: leave edges unstamped, by design */
        eb_pending |= FLAG_BURST;
        return;
    }
    if (b->n > 0) {
        if (d) {
            b->d[b->n - 1] = d;
            if (++b->n == EB_N) eb_close();
            return;
        }
        eb_close();
        b = &eb[eb_fill];
        if (eb_ready[eb_fill]) {
            eb_pending |= FLAG_BURST;
            return;
        }
    }
    b->first = make64(cap_hi, cap_lo);
    b->n = 1;
    b->first_level = level;
    b->flags = eb_pending;
    eb_pending = 0;
}

ISR(TIMER1_CAPT_vect) {
    uint16_t icr = ICR1;
    if (recip) {
        cap_advance(icr);
        uint64_t t = make64(cap_hi, cap_lo);
        if (rc_n == 0) rc_first = t;
        rc_last = t;
        if (rc_n < 0xFFFF) rc_n++;
        return;
    }
    uint8_t level = (TCCR1B & _BV(ICES1)) ? 1 : 0;
    TCCR1B ^= _BV(ICES1);
    TIFR1 = _BV(ICF1);
    uint8_t pin = PINB & 1;
    uint8_t c = TCNT0; /* Timer0 counts every rising edge of the same clock on T0 */
    eb_push(cap_advance(icr), level);
    if (level) {
        /* the first stamped rise of a stream sets the reference (an edge at the moment the
         * capture was armed may be counted on T0 and never stamped) */
        if (t0_sync) t0_at_rise++;
        else t0_at_rise = c, t0_sync = true;
    }
    int8_t extra = t0_sync ? (int8_t)(uint8_t)(c - t0_at_rise) : 0; /* counted, not stamped */
    bool pending = TIFR1 & _BV(ICF1);
    if (extra >= 2 || (extra == 1 && !pin && !level && !pending) || (pin != level && !pending)) {
        /* the opposite edge came before the capture was re-armed: it is lost */
        edges_dropped++;
        overflows++;
        eb_pending |= FLAG_LOST;
        if (eb[eb_fill].n > 0 && !eb_ready[eb_fill]) eb_close();
        if (pin) TCCR1B &= ~_BV(ICES1);
        else TCCR1B |= _BV(ICES1);
        TIFR1 = _BV(ICF1);
        t0_sync = false;
    }
}

/* ---------------------------------------------------------------- Timer0: count and divide */

/* Timer0 counts T0 rising edges in normal mode; OC0A toggles once per wrap, so the comparator
 * sees one rising edge every DIV_M input cycles. */
#define DIV_M 512
static volatile uint32_t t0_wraps_total; /* 256 per overflow */

ISR(TIMER0_OVF_vect) { t0_wraps_total += 256; }

/* Rising edges counted on T0 since start; call with interrupts off. */
static uint32_t t0_count(void) {
    uint32_t w = t0_wraps_total;
    uint8_t c = TCNT0;
    if (TIFR0 & _BV(TOV0)) {
        w += 256;
        c = TCNT0;
    }
    return w + c;
}

/* ---------------------------------------------------------------- level sampling (OCR1A) */

static volatile uint32_t ls_n, ls_high;
static uint16_t lfsr = 0xACE1;

/* Timer2 overflows at pseudo-random intervals (1 544 to 2 048 ticks, restarted at a random
 * count); interruptible so that the Timer0 overflow (lowest priority) never waits a wrap. */
ISR(TIMER2_OVF_vect, ISR_NOBLOCK) {
    if (ls_n < duty_cap) {
        if (PINB & 1) ls_high++;
        ls_n++;
    }
    lfsr = (uint16_t)((lfsr >> 1) ^ (-(lfsr & 1u) & 0xB400u));
    TCNT2 = (uint8_t)(lfsr & 63);
}

/* ---------------------------------------------------------------- ADC slots (OCR1B) */

typedef struct {
    uint64_t first;
    uint16_t n;
    uint8_t flags;
    uint16_t v[AN_N];
} abuf_t;

static abuf_t ab[RAILS][2];
static uint8_t ab_fill[RAILS];           /* batch being filled */
static volatile uint8_t ab_ready[RAILS]; /* bit per batch: closed, waiting to be sent */
static uint8_t ab_lost[RAILS];           /* the next batch starts after a loss */
static uint16_t adc_step;    /* ticks between ADC slots */
static uint64_t adc_due;     /* tick of the next slot */
static uint64_t adc_conv_t;  /* tick the conversion in progress started */
static int8_t adc_ch = -1;   /* channel converting, -1 none */
static uint32_t rail_period; /* ticks between samples of one channel, in force */

static uint8_t rails_on(void) {
    uint8_t n = 0;
    for (uint8_t i = 0; i < RAILS; i++) n += (rail_en >> i) & 1;
    return n;
}

static void adc_store(uint8_t ch, uint16_t v, uint64_t t) {
    uint8_t i = ab_fill[ch];
    abuf_t *b = &ab[ch][i];
    if (ab_ready[ch] & (1 << i)) {
        samples_dropped++; /* both batches wait for the UART */
        ab_lost[ch] = 1;
        return;
    }
    if (b->n == 0) {
        b->first = t;
        b->flags = ab_lost[ch] ? FLAG_LOST : 0;
        ab_lost[ch] = 0;
    }
    b->v[b->n++] = v;
    if (b->n == AN_N) {
        ab_ready[ch] |= (uint8_t)(1 << i);
        ab_fill[ch] = i ^ 1;
    }
}

/* Interruptible, like the sampler above, but only after its 16-bit write: OCR1B is written
 * through the high-byte TEMP register that every 16-bit Timer1 access shares (data sheet,
 * "Accessing 16-bit Registers"); a capture or line interrupt reading ICR1 or TCNT1 between
 * the two byte writes would put its own high byte into OCR1B and move the slot by up to
 * 65 536 ticks (4 ms). So the handler starts blocking and enables interrupts after it. */
ISR(TIMER1_COMPB_vect) {
    OCR1B += adc_step;
    sei();
    uint64_t slot = adc_due;
    adc_due += adc_step;
    if (adc_ch >= 0) {
        if (ADCSRA & _BV(ADSC)) {
            samples_dropped++; /* cannot happen above the minimum interval; never made up */
            ab_lost[adc_ch] = 1;
        } else {
            adc_store((uint8_t)adc_ch, ADC, adc_conv_t);
        }
    }
    adc_conv_t = slot;
    /* next enabled rail, round robin */
    int8_t c = adc_ch;
    for (uint8_t k = 0; k < RAILS; k++) {
        c = (int8_t)((c + 1) & 3);
        if (rail_en & (1 << c)) break;
    }
    if (!(rail_en & (1 << c))) {
        adc_ch = -1;
        return;
    }
    adc_ch = c;
    ADMUX = _BV(REFS1) | _BV(REFS0) | (uint8_t)c;
    ADCSRA |= _BV(ADSC);
}

/* The rail interval, checked when set against the rails on then, kept valid when rails are
 * switched on or off later: each slot fits a conversion (MIN_SLOT) and 16 bits. */
static void rail_interval_fit(void) {
    uint8_t n = rails_on();
    if (!n) return;
    if (rail_interval < (uint32_t)n * MIN_SLOT) rail_interval = (uint32_t)n * MIN_SLOT;
    if (rail_interval > (uint32_t)n * 65535UL) rail_interval = (uint32_t)n * 65535UL;
}

static void rails_restart(void) {
    /* interrupts off */
    rail_interval_fit();
    uint8_t n = rails_on();
    TIMSK1 &= ~_BV(OCIE1B);
    adc_ch = -1;
    for (uint8_t i = 0; i < RAILS; i++) {
        ab[i][0].n = ab[i][1].n = 0;
        ab_ready[i] = ab_fill[i] = ab_lost[i] = 0;
    }
    if (!n || !streaming) return;
    adc_step = (uint16_t)(rail_interval / n);
    rail_period = (uint32_t)adc_step * n;
    uint16_t t = TCNT1;
    OCR1B = t + adc_step;
    adc_due = extend(t) + adc_step;
    TIFR1 = _BV(OCF1B);
    TIMSK1 |= _BV(OCIE1B);
}

/* ---------------------------------------------------------------- line inputs */

typedef struct {
    uint64_t t;
    uint8_t ch, level;
} lev_t;

static lev_t lq[LN_N];
static volatile uint8_t lq_head, lq_tail;
static uint8_t line_lost; /* bit per line channel */
static uint8_t line_level[5];

static void line_event(uint8_t ch, uint8_t level) {
    if (!streaming || !(enabled & (1 << ch))) {
        line_level[ch] = level; /* not reported: the next reported change continues from here */
        return;
    }
    uint8_t nh = (uint8_t)((lq_head + 1) % LN_N);
    if (nh == lq_tail) {
        edges_dropped++;
        line_lost |= 1 << ch;
        return;
    }
    lq[lq_head].t = now_ticks();
    lq[lq_head].ch = ch;
    lq[lq_head].level = level;
    lq_head = nh;
}

ISR(INT0_vect) { line_event(CH_RESET, (PIND >> 2) & 1); }
ISR(INT1_vect) { line_event(CH_FAULT, (PIND >> 3) & 1); }
ISR(PCINT0_vect) { line_event(CH_HEART, (PINB >> 1) & 1); }

/* ---------------------------------------------------------------- UART */

static volatile uint8_t rxq[64];
static volatile uint8_t rx_head, rx_tail;

ISR(USART_RX_vect) {
    uint8_t b = UDR0;
    uint8_t nh = (uint8_t)((rx_head + 1) & 63);
    if (nh != rx_tail) {
        rxq[rx_head] = b;
        rx_head = nh;
    }
}

static void uart_put(uint8_t b) {
    while (!(UCSR0A & _BV(UDRE0))) {
    }
    UDR0 = b;
}

/* ---------------------------------------------------------------- frames out */

static uint8_t fb[FB_MAX];
static uint16_t tx_seq;
#define BODY (fb + PROTO_HEADER)

static void send_frame(uint8_t type, uint16_t body_len) {
    fb[0] = PROTO_VERSION;
    fb[1] = type;
    proto_put16(fb + 2, tx_seq++);
    uint16_t n = PROTO_HEADER + body_len;
    uint32_t crc = proto_crc32_final(proto_crc32_update(proto_crc32_init(), fb, n));
    proto_put32(fb + n, crc);
    proto_cobs_put(fb, n + PROTO_CRC, uart_put);
    frames_sent++;
}

/* A length-prefixed text from flash. */
static uint8_t put_text(uint8_t *p, const char *s) {
    uint8_t n = (uint8_t)strlen_P(s);
    p[0] = n;
    memcpy_P(p + 1, s, n);
    return (uint8_t)(n + 1);
}

static uint8_t put_chan(uint8_t *p, uint8_t id, uint8_t kind, uint8_t info, const char *label) {
    p[0] = id;
    p[1] = kind;
    p[2] = info;
    return (uint8_t)(3 + put_text(p + 3, label));
}

static void send_hello(void) {
    uint8_t *p = BODY;
    p[0] = PROTO_VERSION;
    p[1] = 0;
    proto_put64(p + 2, TICK_HZ);
    proto_put32(p + 10, 1);
    proto_put16(p + 14, TIMEBASE_PPM);
    proto_put32(p + 16, 40); /* kHz of edges stamped without loss (tested), see FIRMWARE.md */
    uint16_t o = 20;
    o += put_text(p + o, PSTR(FIRMWARE_ID));
    uint8_t *count = p + o++;
    *count = 0;
    o += put_chan(p + o, CH_CLK, 1, 1 | 2 | 4, PSTR("CLK")), (*count)++;
    o += put_chan(p + o, CH_GATED, 1, 2, PSTR("CLK_GATED")), (*count)++;
    o += put_chan(p + o, CH_RESET, 2, 1, PSTR("RESET")), (*count)++;
    o += put_chan(p + o, CH_FAULT, 2, 2, PSTR("FAULT")), (*count)++;
    o += put_chan(p + o, CH_HEART, 2, 3, PSTR("HEARTBEAT")), (*count)++;
    static const char labels[RAILS][6] PROGMEM = {"RAIL0", "RAIL1", "RAIL2", "RAIL3"};
    for (uint8_t i = 0; i < RAILS; i++) {
        o += put_chan(p + o, (uint8_t)(CH_RAIL0 + i), 3, 10, labels[i]);
        proto_put32(p + o, (uint32_t)cal.scale_num_uv[i]);
        proto_put32(p + o + 4, SCALE_DEN);
        proto_put32(p + o + 8, (uint32_t)cal.offset_uv[i]);
        o += 12;
        (*count)++;
    }
    send_frame(MSG_HELLO, o);
}

static void send_ack(uint16_t seq, uint8_t cmd, uint8_t result, uint32_t value) {
    proto_put16(BODY, seq);
    BODY[2] = cmd;
    BODY[3] = result;
    proto_put32(BODY + 4, value);
    send_frame(MSG_ACK, 8);
}

static void send_log(uint8_t level, const char *text) {
    BODY[0] = level;
    uint8_t n = put_text(BODY + 1, text);
    send_frame(MSG_LOG, (uint16_t)(1 + n));
}

static void send_edges(uint8_t i) {
    BARRIER();
    ebuf_t *b = &eb[i];
    uint8_t *p = BODY;
    p[0] = CH_CLK;
    p[1] = b->first_level;
    p[2] = b->flags;
    proto_put16(p + 3, b->n);
    proto_put64(p + 5, b->first);
    uint16_t o = 13;
    for (uint16_t k = 0; k + 1 < b->n; k++) o += proto_leb128_put(p + o, b->d[k]);
    BARRIER();
    b->n = 0;
    eb_ready[i] = 0;
    send_frame(MSG_EDGES, o);
}

static void send_count(uint8_t ch, uint8_t method, uint64_t start, uint32_t gate, uint32_t edges,
                       uint32_t samples, uint32_t high) {
    uint8_t *p = BODY;
    p[0] = ch;
    p[1] = method;
    proto_put64(p + 2, start);
    proto_put32(p + 10, gate);
    proto_put32(p + 14, edges);
    proto_put32(p + 18, samples);
    proto_put32(p + 22, high);
    send_frame(MSG_COUNT, 26);
}

static void send_status(void) {
    uint8_t *p = BODY;
    proto_put64(p, now_ticks());
    proto_put32(p + 8, frames_sent);
    proto_put32(p + 12, edges_dropped);
    proto_put32(p + 16, samples_dropped);
    proto_put16(p + 20, overflows);
    proto_put16(p + 22, rx_bad);
    p[24] = (uint8_t)((eb_ready[0] + eb_ready[1]) * 50);
    p[25] = streaming ? 1 : 0;
    send_frame(MSG_STATUS, 26);
}

/* One closed analog batch; interrupts stay on (a long pause would lose Timer0 counts). */
static void send_analog(uint8_t i, uint8_t k) {
    BARRIER();
    uint8_t *p = BODY;
    abuf_t *b = &ab[i][k];
    uint16_t n = b->n;
    p[0] = (uint8_t)(CH_RAIL0 + i);
    p[1] = b->flags;
    proto_put16(p + 2, n);
    proto_put64(p + 4, b->first);
    memcpy(p + 16, b->v, 2 * n); /* little-endian core: raw u16 as on the wire */
    BARRIER();
    b->n = 0;
    cli();
    ab_ready[i] &= (uint8_t)~(1 << k);
    sei();
    proto_put32(p + 12, rail_period);
    send_frame(MSG_ANALOG, (uint16_t)(16 + 2 * n));
}

/* Queued line events, one batch per run of alternating events of one channel. */
static void send_lines(void) {
    BARRIER();
    while (lq_tail != lq_head) {
        uint8_t ch = lq[lq_tail].ch;
        uint8_t *p = BODY;
        uint8_t bit = (uint8_t)(1 << ch);
        uint8_t first = lq[lq_tail].level;
        p[0] = ch;
        p[1] = first;
        p[2] = 0;
        cli();
        if ((line_lost & bit) || first == line_level[ch]) p[2] = FLAG_LOST;
        line_lost &= (uint8_t)~bit;
        sei();
        uint64_t t0 = lq[lq_tail].t, prev = t0;
        proto_put64(p + 5, t0);
        uint16_t n = 1, o = 13;
        uint8_t level = first;
        lq_tail = (uint8_t)((lq_tail + 1) % LN_N);
        while (lq_tail != lq_head && lq[lq_tail].ch == ch && lq[lq_tail].level != level &&
               lq[lq_tail].t > prev && n < 24) {
            o += proto_leb128_put(p + o, lq[lq_tail].t - prev);
            prev = lq[lq_tail].t;
            level = lq[lq_tail].level;
            lq_tail = (uint8_t)((lq_tail + 1) % LN_N);
            n++;
        }
        line_level[ch] = level;
        proto_put16(p + 3, n);
        send_frame(MSG_LINES, o);
    }
}

/* ---------------------------------------------------------------- count windows */

static uint64_t win_start, win_end;
static uint32_t win_t0;

static void capture_setup(void) {
    /* interrupts off: route input capture to the pin (stamps) or the comparator (reciprocal) */
    bool stamps = streaming && edge_mode != MODE_COUNT && (enabled & (1 << CH_CLK));
    recip = streaming && edge_mode == MODE_COUNT && (enabled & (1 << CH_CLK));
    if (recip) ACSR = _BV(ACIC);
    else ACSR = 0;
    TCCR1B |= _BV(ICES1);
    if (stamps && (PINB & 1)) TCCR1B &= ~_BV(ICES1);
    TIFR1 = _BV(ICF1);
    eb[0].n = eb[1].n = 0;
    eb_ready[0] = eb_ready[1] = 0;
    eb_fill = 0;
    eb_pending = FLAG_BURST;
    t0_sync = false;
    rc_n = 0;
    if (stamps || recip) TIMSK1 |= _BV(ICIE1);
    else TIMSK1 &= ~_BV(ICIE1);
}

static void windows_restart(void) {
    cli();
    win_start = now_ticks();
    win_t0 = t0_count();
    ls_n = ls_high = 0;
    sei();
    win_end = win_start + gate_ticks;
}

static void window_end(void) {
    cli();
    uint64_t t = now_ticks();
    uint32_t c = t0_count();
    uint32_t n = ls_n, h = ls_high;
    ls_n = ls_high = 0;
    uint16_t caps = rc_n;
    uint64_t rf = rc_first, rl = rc_last;
    if (caps > 0) {
        rc_first = rl; /* consecutive windows share their boundary capture */
        rc_n = 1;
    }
    sei();
    uint32_t edges = c - win_t0;
    uint32_t gate = (uint32_t)(t - win_start);
    bool both_counts = (enabled & (1 << CH_CLK)) && edge_mode == MODE_COUNT;
    if ((enabled & (1 << CH_GATED)))
        send_count(CH_GATED, 0, win_start, gate, edges, 0, 0);
    if (both_counts && caps >= 2)
        send_count(CH_CLK, 1, rf, (uint32_t)(rl - rf), (uint32_t)(caps - 1) * DIV_M, n, h);
    else if (both_counts && n > 0)
        send_count(CH_CLK, 1, win_start, 0, 0, n, h);
    win_start = t;
    win_t0 = c;
    win_end = t + gate_ticks;
}

/* ---------------------------------------------------------------- host commands */

static bool chan_exists(uint8_t ch) { return ch <= CH_HEART || (ch >= CH_RAIL0 && ch < CH_RAIL0 + RAILS); }

static void save_cal(void) { eeprom_update_block(&cal, &cal_ee, sizeof cal); }

static void configure(uint16_t seq, uint8_t ch, uint8_t param, uint32_t value) {
    uint8_t r = ACK_OK;
    uint32_t in_force = value;
    bool all = ch == 0xFF;
    bool rail = ch >= CH_RAIL0 && ch < CH_RAIL0 + RAILS;
    if (!all && !chan_exists(ch)) {
        send_ack(seq, MSG_CONFIGURE, ACK_BAD_CHANNEL, 0);
        return;
    }
    switch (param) {
    case CFG_ENABLE:
        if (all || value > 1) r = all ? ACK_BAD_CHANNEL : ACK_BAD_VALUE;
        else if (rail) rail_en = value ? (rail_en | (1 << (ch - CH_RAIL0))) : (rail_en & ~(1 << (ch - CH_RAIL0)));
        else enabled = value ? (enabled | (1 << ch)) : (enabled & ~(1 << ch));
        if (r) in_force = rail ? (rail_en >> (ch - CH_RAIL0)) & 1 : (enabled >> (ch & 7)) & 1;
        break;
    case CFG_EDGE_MODE:
        if (!(all || ch == CH_CLK)) r = ACK_BAD_CHANNEL;
        else if (value > MODE_BOTH) r = ACK_BAD_VALUE, in_force = edge_mode;
        else edge_mode = (uint8_t)value;
        break;
    case CFG_GATE:
        if (!(all || ch == CH_CLK || ch == CH_GATED)) r = ACK_BAD_CHANNEL;
        else if (value < 16000UL || value > 160000000UL) r = ACK_BAD_VALUE, in_force = gate_ticks;
        else gate_ticks = value;
        break;
    case CFG_SAMPLE_INTERVAL: {
        uint8_t n = rails_on() ? rails_on() : 1;
        if (!(all || rail)) r = ACK_BAD_CHANNEL;
        else if (value / n < MIN_SLOT || value / n > 65535UL) r = ACK_BAD_VALUE, in_force = rail_interval;
        else rail_interval = value;
        break;
    }
    case CFG_DUTY_SAMPLES:
        if (!(all || ch == CH_CLK)) r = ACK_BAD_CHANNEL;
        else duty_cap = value;
        break;
    case CFG_CAL_SCALE:
        if (!rail) r = ACK_BAD_CHANNEL;
        else if ((int32_t)value <= 0) r = ACK_BAD_VALUE, in_force = (uint32_t)cal.scale_num_uv[ch - CH_RAIL0];
        else cal.scale_num_uv[ch - CH_RAIL0] = (int32_t)value, save_cal();
        break;
    case CFG_CAL_OFFSET:
        if (!rail) r = ACK_BAD_CHANNEL;
        else cal.offset_uv[ch - CH_RAIL0] = (int32_t)value, save_cal();
        break;
    case CFG_STATUS_INTERVAL:
        if (!all) r = ACK_BAD_CHANNEL;
        else if (value < 100 || value > 60000UL) r = ACK_BAD_VALUE, in_force = status_ms;
        else status_ms = (uint16_t)value;
        break;
    default:
        r = ACK_BAD_PARAM;
        in_force = 0;
    }
    if (r == ACK_BAD_CHANNEL || r == ACK_BAD_PARAM) in_force = 0;
    if (r == ACK_OK && streaming) {
        /* settings take effect now, in fresh windows and batches */
        cli();
        capture_setup();
        rails_restart();
        sei();
        windows_restart();
    }
    send_ack(seq, MSG_CONFIGURE, r, in_force);
}

static void start_streaming(bool on) {
    streaming = on;
    cli();
    lq_tail = lq_head; /* nothing queued before a start, or kept over a stop */
    line_lost = 0;
    capture_setup();
    rails_restart();
    sei();
    windows_restart();
}

static void handle_frame(const uint8_t *f, int16_t n) {
    if (n < 8) {
        rx_bad++;
        send_ack(0xFFFF, 0, ACK_BAD_FRAME, 0);
        return;
    }
    uint32_t crc = proto_crc32_final(proto_crc32_update(proto_crc32_init(), f, (uint16_t)(n - 4)));
    if (crc != proto_get32(f + n - 4)) {
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
        start_streaming(true);
        send_ack(seq, type, ACK_OK, 0);
        break;
    case MSG_STOP:
        start_streaming(false);
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

static uint8_t rx_raw[RX_RAW];
static uint8_t rx_dec[RX_RAW];
static uint8_t rx_len;
static bool rx_overlong;

static void poll_rx(void) {
    while (rx_tail != rx_head) {
        uint8_t b = rxq[rx_tail];
        rx_tail = (uint8_t)((rx_tail + 1) & 63);
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

/* ---------------------------------------------------------------- start-up and main loop */

static void load_cal(void) {
    eeprom_read_block(&cal, &cal_ee, sizeof cal);
    if (cal.magic != CAL_MAGIC) {
        cal.magic = CAL_MAGIC;
        for (uint8_t i = 0; i < RAILS; i++) cal.scale_num_uv[i] = DEFAULT_SCALE, cal.offset_uv[i] = 0;
    }
}

static void hw_init(void) {
    /* UART 1 000 000 baud 8N1: UBRR 0 at 16 MHz */
    UBRR0H = 0;
    UBRR0L = 0;
    UCSR0A = 0;
    UCSR0C = _BV(UCSZ01) | _BV(UCSZ00);
    UCSR0B = _BV(RXEN0) | _BV(TXEN0) | _BV(RXCIE0);
    /* Timer1 free-running at the CPU clock, noise canceller off */
    TCCR1A = 0;
    TCCR1B = _BV(CS10) | _BV(ICES1);
    TIMSK1 = _BV(TOIE1);
    /* Timer2: level sampling clock, CPU clock / 8 */
    TCCR2A = 0;
    TCCR2B = _BV(CS21);
    TIMSK2 = _BV(TOIE2);
    /* Timer0: normal mode on the T0 rising edge, OC0A toggles once per wrap */
    DDRD |= _BV(PD6);
    TCCR0A = _BV(COM0A0);
    OCR0A = 0x80;
    TCCR0B = _BV(CS02) | _BV(CS01) | _BV(CS00);
    TIMSK0 = _BV(TOIE0);
    /* lines: any change on INT0/INT1, pin change on PB1 */
    EICRA = _BV(ISC00) | _BV(ISC10);
    EIMSK = _BV(INT0) | _BV(INT1);
    PCMSK0 = _BV(PCINT1);
    PCICR = _BV(PCIE0);
    line_level[CH_RESET] = (PIND >> 2) & 1;
    line_level[CH_FAULT] = (PIND >> 3) & 1;
    line_level[CH_HEART] = (PINB >> 1) & 1;
    /* ADC: internal 1.1 V reference, 125 kHz ADC clock, digital inputs off on ADC0..3 */
    ADMUX = _BV(REFS1) | _BV(REFS0);
    ADCSRA = _BV(ADEN) | _BV(ADPS2) | _BV(ADPS1) | _BV(ADPS0);
    DIDR0 = 0x0F;
    DIDR1 = _BV(AIN1D) | _BV(AIN0D);
}

int main(void) {
    load_cal();
    hw_init();
    sei();
    send_hello();
    uint64_t next_status = now_ticks();
    for (;;) {
        poll_rx();
        if (!streaming) continue;
        uint64_t t = now_ticks();
        /* oldest first: when both wait, the one to be filled next is the older */
        uint8_t older = eb_fill;
        if (eb_ready[older]) send_edges(older);
        if (eb_ready[older ^ 1]) send_edges(older ^ 1);
        cli();
        /* a batch of a slow or stopped clock does not wait for ever */
        ebuf_t *b = &eb[eb_fill];
        if (b->n > 0 && !eb_ready[eb_fill] && extend(TCNT1) - b->first > EB_AGE_TICKS) eb_close();
        sei();
        for (uint8_t i = 0; i < RAILS; i++)
            for (uint8_t k = 0; k < 2; k++)
                if (ab_ready[i] & (1 << k)) send_analog(i, k);
        send_lines();
        if (t >= win_end) window_end();
        if (t >= next_status) {
            send_status();
            next_status = t + (uint64_t)status_ms * (TICK_HZ / 1000);
        }
        if (eb_pending & FLAG_LOST) {
            static uint16_t warned;
            if (warned != overflows) {
                warned = overflows;
                send_log(1, PSTR("edge lost: clock too fast for per-edge timestamps"));
            }
        }
    }
}
