/* Simulator harness for the reference probe firmware (libsimavr).
 *
 * Usage: harness FIRMWARE.elf VECTORS.vec OUTDIR
 *        harness --serve FIRMWARE.elf SECONDS FREQ_HZ [stamps]
 * The second form runs the probe behind simavr's pseudo-terminal bridge (/tmp/simavr-uart0) with a
 * FREQ_HZ clock at 50 % duty for SECONDS of wall time, for host programs to connect to; the
 * clock is wired for count windows, or with `stamps` for per-edge timestamps (simavr wires one
 * capture path at a time, see wire_reciprocal).
 * Checks the wire helpers against the protocol's test vectors, then runs one fresh simulated
 * ATmega328P per scenario: drives its pins from cycle timers with known signals, sends host
 * commands over the UART, writes the probe's byte stream to OUTDIR/<scenario>.bin and what was
 * driven to OUTDIR/<scenario>.truth (read by the host tests in tests/avr_firmware.rs), prints
 * PASS/FAIL per check and exits non-zero when any check failed.
 *
 * Simulator-only behaviour is marked [sim] in the check names: simavr 1.6 counts external clocks
 * above the silicon limit of f_cpu / 2.5 and lands pin events on instruction boundaries. */
#include <math.h>
#include <stdarg.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "avr_acomp.h"
#include "avr_adc.h"
#include "avr_ioport.h"
#include "avr_timer.h"
#include "avr_uart.h"
#include "sim_avr.h"
#include "sim_cycle_timers.h"
#include "sim_elf.h"
#include "parts/uart_pty.h"
#include <time.h>
#include <unistd.h>

#include "proto.h"

#define F_CPU 16000000.0
#define MAX_EDGES 400000
#define MAX_MSGS 20000

static int failures, checks;

static void check(bool ok, const char *fmt, ...) {
    va_list ap;
    va_start(ap, fmt);
    printf("%s ", ok ? "PASS" : "FAIL");
    vprintf(fmt, ap);
    printf("\n");
    va_end(ap);
    checks++;
    if (!ok) failures++;
}

/* ------------------------------------------------------------------ decoded probe messages */

typedef struct {
    uint8_t type;
    uint16_t seq;
    uint16_t len;
    uint64_t at_cycle; /* simulated cycle when the frame's delimiter arrived */
    uint8_t body[PROTO_MAX_FRAME];
} msg_t;

typedef struct {
    avr_t *avr;
    FILE *bin;
    uint8_t raw[1100];
    uint16_t raw_n;
    msg_t *msgs;
    int n_msgs;
    int bad_frames;
    uint16_t host_seq;
    /* clock stimulus */
    bool clk_on;
    double f_hz, duty, jitter_cycles;
    double t_ideal; /* ideal time of the next edge, cycles */
    int level;
    uint64_t *edges; /* driven edge cycles; the clock starts low, so even indices rise */
    int n_edges;
    uint64_t rng;
    avr_irq_t *pin_icp, *pin_t0, *icp_irq;
    /* line stimulus: up to 64 scheduled toggles */
    struct {
        uint64_t cycle;
        char port;
        int pin, level;
    } line_ev[64];
    int n_line, line_next;
} sim_t;

static sim_t S;

static void on_uart_byte(struct avr_irq_t *irq, uint32_t value, void *param) {
    (void)irq;
    (void)param;
    uint8_t b = (uint8_t)value;
    fputc(b, S.bin);
    if (b != 0) {
        if (S.raw_n < sizeof S.raw) S.raw[S.raw_n++] = b;
        return;
    }
    if (S.raw_n == 0) return;
    uint8_t dec[PROTO_MAX_FRAME + 8];
    int16_t n = proto_cobs_decode(S.raw, S.raw_n, dec, sizeof dec);
    S.raw_n = 0;
    if (n < 8 || n > (int16_t)PROTO_MAX_FRAME) {
        S.bad_frames++;
        return;
    }
    uint32_t crc = proto_crc32_final(proto_crc32_update(proto_crc32_init(), dec, (uint16_t)(n - 4)));
    if (crc != proto_get32(dec + n - 4) || dec[0] != PROTO_VERSION || S.n_msgs >= MAX_MSGS) {
        S.bad_frames++;
        return;
    }
    msg_t *m = &S.msgs[S.n_msgs++];
    m->type = dec[1];
    m->seq = proto_get16(dec + 2);
    m->len = (uint16_t)(n - 8);
    m->at_cycle = S.avr->cycle;
    memcpy(m->body, dec + 4, m->len);
}

/* ------------------------------------------------------------------ stimulus */

static double uniform(void) {
    S.rng ^= S.rng << 13;
    S.rng ^= S.rng >> 7;
    S.rng ^= S.rng << 17;
    return ((S.rng >> 11) + 0.5) / 9007199254740992.0;
}

static double gauss(void) { return sqrt(-2.0 * log(uniform())) * cos(6.283185307179586 * uniform()); }

static avr_cycle_count_t clock_edge(avr_t *avr, avr_cycle_count_t when, void *param) {
    (void)param;
    (void)when;
    if (!S.clk_on) return 0;
    /* [sim] every edge due by now, even several at one instruction boundary: a clock faster than
     * the instructions keeps its edge count, as on a real pin */
    double period = F_CPU / S.f_hz;
    avr_cycle_count_t next;
    do {
        S.level ^= 1;
        avr_raise_irq(S.pin_icp, (uint32_t)S.level);
        avr_raise_irq(S.pin_t0, (uint32_t)S.level);
        if (S.n_edges < MAX_EDGES) S.edges[S.n_edges++] = avr->cycle;
        S.t_ideal += S.level ? period * S.duty : period * (1.0 - S.duty);
        double t = S.t_ideal + S.jitter_cycles * gauss();
        next = t < (double)avr->cycle + 0.5 ? avr->cycle : (avr_cycle_count_t)llround(t);
    } while (next <= avr->cycle);
    return next;
}

static void clock_start(double f_hz, double duty, double jitter_ns) {
    S.clk_on = true;
    S.f_hz = f_hz;
    S.duty = duty;
    S.jitter_cycles = jitter_ns * 1e-9 * F_CPU;
    S.level = 0;
    S.n_edges = 0;
    S.t_ideal = (double)S.avr->cycle + 1000.0;
    avr_cycle_timer_register(S.avr, 1000, clock_edge, NULL);
}

static avr_cycle_count_t line_toggle(avr_t *avr, avr_cycle_count_t when, void *param) {
    (void)param;
    (void)when;
    while (S.line_next < S.n_line && S.line_ev[S.line_next].cycle <= avr->cycle) {
        int i = S.line_next++;
        avr_raise_irq(avr_io_getirq(avr, AVR_IOCTL_IOPORT_GETIRQ(S.line_ev[i].port), S.line_ev[i].pin),
                      (uint32_t)S.line_ev[i].level);
        S.line_ev[i].cycle = avr->cycle; /* when it really happened */
    }
    return S.line_next < S.n_line ? S.line_ev[S.line_next].cycle : 0;
}

static void set_adc_mv(int ch, double pin_mv) {
    avr_raise_irq(avr_io_getirq(S.avr, AVR_IOCTL_ADC_GETIRQ, ADC_IRQ_ADC0 + ch), (uint32_t)lround(pin_mv));
}

/* OC0A (PD6) drives the comparator's AIN0 on silicon through the pin; simavr needs the link. */
static void on_oc0a(struct avr_irq_t *irq, uint32_t value, void *param) {
    (void)irq;
    (void)param;
    avr_raise_irq(avr_io_getirq(S.avr, AVR_IOCTL_ACOMP_GETIRQ, ACOMP_IRQ_AIN0), value ? 5000 : 0);
}

/* [sim] simavr does not disconnect ICP1 from its pin when the comparator feeds the capture, nor
 * the comparator when the pin does: a run in count-window mode wires only the comparator path.
 * On silicon OC0A (D6) reaches AIN0 through the pin and AIN1 (D7) sits at half supply. */
static void wire_reciprocal(void) {
    avr_unconnect_irq(S.pin_icp, S.icp_irq);
    avr_irq_register_notify(avr_io_getirq(S.avr, AVR_IOCTL_IOPORT_GETIRQ('D'), 6), on_oc0a, NULL);
    avr_raise_irq(avr_io_getirq(S.avr, AVR_IOCTL_ACOMP_GETIRQ, ACOMP_IRQ_AIN1), 2500);
}

/* ------------------------------------------------------------------ simulation control */

static void nosleep(avr_t *avr, avr_cycle_count_t how_long) {
    (void)avr;
    (void)how_long;
}

static void run_until(uint64_t cycle) {
    while (S.avr->cycle < cycle) {
        int st = avr_run(S.avr);
        if (st == cpu_Done || st == cpu_Crashed) {
            check(false, "simulated CPU stopped (state %d) at cycle %llu", st, (unsigned long long)S.avr->cycle);
            exit(2);
        }
    }
}

static void run_ms(double ms) { run_until(S.avr->cycle + (uint64_t)(ms * 1e-3 * F_CPU)); }

static void sim_open(const char *elf, const char *outdir, const char *name) {
    static elf_firmware_t fw;
    if (elf_read_firmware(elf, &fw) != 0) {
        fprintf(stderr, "harness: cannot read firmware %s\n", elf);
        exit(2);
    }
    free(S.msgs);
    free(S.edges);
    memset(&S, 0, sizeof S);
    S.msgs = calloc(MAX_MSGS, sizeof(msg_t));
    S.edges = calloc(MAX_EDGES, sizeof(uint64_t));
    S.rng = 0x9E3779B97F4A7C15ULL;
    char path[512];
    snprintf(path, sizeof path, "%s/%s.bin", outdir, name);
    S.bin = fopen(path, "wb");
    if (!S.msgs || !S.edges || !S.bin) {
        fprintf(stderr, "harness: cannot open %s\n", path);
        exit(2);
    }
    S.avr = avr_make_mcu_by_name("atmega328p");
    avr_init(S.avr);
    S.avr->frequency = (uint32_t)F_CPU;
    S.avr->vcc = S.avr->avcc = S.avr->aref = 5000;
    S.avr->sleep = nosleep;
    if (getenv("HARNESS_LOG")) S.avr->log = (uint8_t)atoi(getenv("HARNESS_LOG"));
    avr_load_firmware(S.avr, &fw);
    uint32_t flags = 0;
    avr_ioctl(S.avr, AVR_IOCTL_UART_GET_FLAGS('0'), &flags);
    flags &= ~(uint32_t)(AVR_UART_FLAG_POLL_SLEEP | AVR_UART_FLAG_STDIO);
    avr_ioctl(S.avr, AVR_IOCTL_UART_SET_FLAGS('0'), &flags);
    avr_irq_register_notify(avr_io_getirq(S.avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_OUTPUT), on_uart_byte, NULL);
    S.pin_icp = avr_io_getirq(S.avr, AVR_IOCTL_IOPORT_GETIRQ('B'), 0);
    S.pin_t0 = avr_io_getirq(S.avr, AVR_IOCTL_IOPORT_GETIRQ('D'), 4);
    S.icp_irq = avr_io_getirq(S.avr, AVR_IOCTL_TIMER_GETIRQ('1'), TIMER_IRQ_IN_ICP);
    /* idle levels: lines low, clock low, rails at 5.0 V through the divider */
    for (int i = 0; i < 4; i++) set_adc_mv(i, 5000.0 / 6.164835);
    printf("-- scenario %s\n", name);
}

static void sim_close(const char *outdir, const char *name, const char *truth) {
    fclose(S.bin);
    char path[512];
    snprintf(path, sizeof path, "%s/%s.truth", outdir, name);
    FILE *f = fopen(path, "w");
    if (!f) exit(2);
    fputs(truth, f);
    fclose(f);
    avr_terminate(S.avr);
}

static uint8_t vec_wire[2100];
static int vec_wn;
static void vec_put(uint8_t b) { vec_wire[vec_wn++] = b; }

/* The ticks of an EDGES or LINES batch (first_tick, then LEB128 deltas); returns how many. */
static int batch_ticks(const msg_t *m, uint64_t *out, int cap) {
    uint16_t count = proto_get16(m->body + 3), o = 13;
    uint64_t t = proto_get64(m->body + 5);
    int n = 0;
    for (uint16_t k = 0; k < count && n < cap; k++) {
        if (k > 0) {
            uint64_t d;
            uint8_t used = proto_leb128_get(m->body + o, (uint16_t)(m->len - o), &d);
            if (!used) break;
            o += used;
            t += d;
        }
        out[n++] = t;
    }
    return n;
}

static int find_msg(uint8_t type, int from) {
    for (int i = from; i < S.n_msgs; i++)
        if (S.msgs[i].type == type) return i;
    return -1;
}

/* Send a host frame; corrupt flips one byte of the encoded frame (not the delimiter). */
static uint8_t host_version = PROTO_VERSION; /* a test may send another */

/* Raw bytes to the probe's UART, 16 at a time (the simulated receiver keeps only a few). */
static void send_raw(const uint8_t *b, int n) {
    avr_irq_t *in = avr_io_getirq(S.avr, AVR_IOCTL_UART_GETIRQ('0'), UART_IRQ_INPUT);
    for (int i = 0; i < n; i++) {
        avr_raise_irq(in, b[i]);
        if (i % 16 == 15) run_ms(0.3);
    }
}

static uint16_t send_cmd(uint8_t type, const uint8_t *body, uint16_t len, int corrupt) {
    uint8_t f[64];
    uint16_t seq = S.host_seq++;
    f[0] = host_version;
    f[1] = type;
    proto_put16(f + 2, seq);
    memcpy(f + 4, body, len);
    proto_put32(f + 4 + len, proto_crc32_final(proto_crc32_update(proto_crc32_init(), f, (uint16_t)(4 + len))));
    vec_wn = 0;
    proto_cobs_put(f, (uint16_t)(8 + len), vec_put);
    if (corrupt) vec_wire[corrupt] ^= 0x20;
    send_raw(vec_wire, vec_wn);
    return seq;
}

/* Send and wait (50 ms simulated) for the ACK of that sequence number; returns its index. */
static int command(uint8_t type, const uint8_t *body, uint16_t len, int corrupt) {
    int from = S.n_msgs;
    uint16_t seq = send_cmd(type, body, len, corrupt);
    uint64_t until = S.avr->cycle + (uint64_t)(0.05 * F_CPU);
    while (S.avr->cycle < until) {
        run_until(S.avr->cycle + 1600);
        for (int i = from; i < S.n_msgs; i++) {
            msg_t *m = &S.msgs[i];
            if (m->type == MSG_ACK && (proto_get16(m->body) == seq || (corrupt && proto_get16(m->body) == 0xFFFF)))
                return i;
            if (type == MSG_DESCRIBE && m->type == MSG_HELLO) return i;
        }
    }
    return -1;
}

static int configure(uint8_t ch, uint8_t param, uint32_t value) {
    uint8_t b[6] = {ch, param};
    proto_put32(b + 2, value);
    return command(MSG_CONFIGURE, b, 6, 0);
}

static bool ack_is(int i, uint8_t result, uint32_t value) {
    return i >= 0 && S.msgs[i].body[3] == result && proto_get32(S.msgs[i].body + 4) == value;
}

/* ------------------------------------------------------------------ vector self-test */

static int hexval(char c) { return c <= '9' ? c - '0' : (c | 0x20) - 'a' + 10; }

static int unhex(const char *s, uint8_t *out, int cap) {
    int n = 0;
    while (s[0] && s[1] && s[0] != '\n' && n < cap) {
        out[n++] = (uint8_t)(hexval(s[0]) << 4 | hexval(s[1]));
        s += 2;
    }
    return n;
}


static void vector_selftest(const char *path) {
    FILE *f = fopen(path, "r");
    if (!f) {
        check(false, "open test vectors %s", path);
        return;
    }
    char line[4200], name[64] = "";
    static uint8_t frame[1100], wire[1100], dec[1100];
    int fn = -1, wn = -1, vectors = 0, ok = 0;
    while (fgets(line, sizeof line, f)) {
        if (!strncmp(line, "name ", 5)) sscanf(line + 5, "%63s", name);
        if (!strncmp(line, "frame ", 6)) fn = unhex(line + 6, frame, sizeof frame);
        if (!strncmp(line, "wire ", 5)) wn = unhex(line + 5, wire, sizeof wire);
        if (fn >= 8 && wn > 0) {
            vec_wn = 0;
            proto_cobs_put(frame, (uint16_t)fn, vec_put);
            uint32_t crc = proto_crc32_final(proto_crc32_update(proto_crc32_init(), frame, (uint16_t)(fn - 4)));
            int16_t dn = proto_cobs_decode(wire, (uint16_t)(wn - 1), dec, sizeof dec);
            bool good = vec_wn == wn && !memcmp(vec_wire, wire, (size_t)wn) && crc == proto_get32(frame + fn - 4) &&
                        dn == fn && !memcmp(dec, frame, (size_t)fn);
            if (!good) printf("     vector %s: encode/decode/CRC mismatch\n", name);
            vectors++;
            ok += good;
            fn = wn = -1;
        }
    }
    fclose(f);
    uint32_t chk = proto_crc32_final(proto_crc32_update(proto_crc32_init(), (const uint8_t *)"123456789", 9));
    check(chk == 0xCBF43926UL, "CRC-32 check value 0xCBF43926 over \"123456789\" (PROTOCOL.md 2)");
    check(vectors >= 10 && ok == vectors, "COBS/CRC helpers reproduce %d/%d frame vectors of messages.vec", ok, vectors);
}

/* ------------------------------------------------------------------ scenarios */

static const char *OUT, *ELF;
static char truth[4096];

static void truthf(const char *fmt, ...) {
    va_list ap;
    va_start(ap, fmt);
    size_t n = strlen(truth);
    vsnprintf(truth + n, sizeof truth - n, fmt, ap);
    va_end(ap);
}

static void scenario_commands(void) {
    truth[0] = 0;
    sim_open(ELF, OUT, "commands");
    run_ms(20);
    int h = find_msg(MSG_HELLO, 0);
    if (getenv("HARNESS_DEBUG") && h >= 0) printf("debug: HELLO (%d bytes) complete at cycle %llu\n", S.msgs[h].len, (unsigned long long)S.msgs[h].at_cycle);
    check(h >= 0, "HELLO sent unsolicited after reset");
    if (h >= 0) {
        uint8_t *b = S.msgs[h].body;
        check(b[0] == 1 && proto_get64(b + 2) == 16000000ULL && proto_get32(b + 10) == 1,
              "HELLO: protocol 1, tick 16 MHz / 1");
        check(b[20 + 1 + b[20]] == 9, "HELLO lists 9 channels (got %d)", b[20 + 1 + b[20]]);
    }
    int d = command(MSG_DESCRIBE, NULL, 0, 0);
    check(d >= 0 && S.msgs[d].type == MSG_HELLO, "DESCRIBE answered by HELLO");
    uint8_t nonce[4];
    proto_put32(nonce, 0xC0FFEE42UL);
    check(ack_is(command(MSG_PING, nonce, 4, 0), ACK_OK, 0xC0FFEE42UL), "PING acknowledged with its nonce");
    int c = command(MSG_PING, nonce, 4, 3);
    check(c >= 0 && proto_get16(S.msgs[c].body) == 0xFFFF && S.msgs[c].body[3] == ACK_BAD_FRAME,
          "corrupted host frame rejected: ACK seq 0xFFFF, result 5 (bad frame)");
    check(ack_is(command(0x4F, NULL, 0, 0), ACK_UNKNOWN, 0), "unknown command 0x4F: ACK result 1");
    check(ack_is(command(MSG_PING, nonce, 3, 0), ACK_BAD_PARAM, 0), "PING with a 3-byte body: result 3");
    host_version = 2;
    check(ack_is(command(MSG_PING, nonce, 4, 0), ACK_BAD_VERSION, 0), "a frame of protocol version 2: result 7");
    host_version = PROTO_VERSION;
    {
        /* 100 bytes of line noise without a delimiter, then one: a single bad-frame ACK */
        uint8_t noise[101];
        memset(noise, 0x55, 100);
        noise[100] = 0;
        int from = S.n_msgs;
        send_raw(noise, 101);
        run_ms(5);
        int acks = 0, bad = 0;
        for (int i = from; i < S.n_msgs; i++)
            if (S.msgs[i].type == MSG_ACK) acks++, bad += proto_get16(S.msgs[i].body) == 0xFFFF && S.msgs[i].body[3] == ACK_BAD_FRAME;
        check(acks == 1 && bad == 1, "100 bytes of noise then a delimiter: one ACK 0xFFFF, result 5 (%d ACKs)", acks);
        check(ack_is(command(MSG_PING, nonce, 4, 0), ACK_OK, 0xC0FFEE42UL), "the next PING after the noise is answered");
    }
    check(ack_is(configure(0, 99, 1), ACK_BAD_PARAM, 0), "CONFIGURE unknown parameter: result 3");
    check(ack_is(configure(7, CFG_ENABLE, 1), ACK_BAD_CHANNEL, 0), "CONFIGURE channel 7 (none): result 2");
    check(ack_is(configure(0xFF, CFG_GATE, 5), ACK_BAD_VALUE, 1600000UL),
          "CONFIGURE gate of 5 ticks: result 4 with the 1 600 000 ticks in force");
    check(ack_is(configure(0xFF, CFG_GATE, 800000UL), ACK_OK, 800000UL), "CONFIGURE gate 50 ms: ok");
    check(ack_is(command(MSG_START, NULL, 0, 0), ACK_OK, 0), "START acknowledged");
    run_ms(1200);
    int st = find_msg(MSG_STATUS, 0);
    check(st >= 0 && S.msgs[st].body[25] == 1 && proto_get16(S.msgs[st].body + 22) == 2,
          "STATUS while streaming: state 1, the two rejected host frames counted");
    check(ack_is(command(MSG_STOP, NULL, 0, 0), ACK_OK, 0), "STOP acknowledged");
    int n = S.n_msgs;
    run_ms(300);
    bool quiet = true;
    for (int i = n; i < S.n_msgs; i++) quiet &= S.msgs[i].type != MSG_ANALOG && S.msgs[i].type != MSG_COUNT;
    check(quiet, "no data messages after STOP");
    check(S.bad_frames == 0, "every probe frame passed COBS and CRC (%d bad)", S.bad_frames);
    sim_close(OUT, "commands", "scenario commands\n");
}

/* Count windows: gated on T0 and reciprocal through the T0 divider and the comparator. */
static void scenario_count(const char *name, double f_hz, double duty) {
    truth[0] = 0;
    sim_open(ELF, OUT, name);
    wire_reciprocal();
    run_ms(2);
    configure(0xFF, CFG_GATE, 800000UL);
    clock_start(f_hz, duty, 0.0);
    command(MSG_START, NULL, 0, 0);
    run_ms(450);
    int gated = 0, gated_ok = 0, recip = 0, recip_ok = 0;
    uint64_t samples = 0, high = 0;
    double worst_g = 0, worst_r = 0;
    /* edges counted through the T0 synchroniser on instruction boundaries: ±1 count, plus the
     * edges that fall within an instruction (up to 4 cycles) of either end [sim] */
    double tol_g = 1.0 + 2.0 * 4.0 * f_hz / F_CPU;
    for (int i = 0; i < S.n_msgs; i++) {
        msg_t *m = &S.msgs[i];
        if (m->type != MSG_COUNT) continue;
        uint32_t gate = proto_get32(m->body + 10), edges = proto_get32(m->body + 14);
        if (m->body[0] == 1 && m->body[1] == 0) {
            double err = edges - f_hz * gate / F_CPU;
            gated++;
            gated_ok += fabs(err) <= tol_g;
            if (fabs(err) > fabs(worst_g)) worst_g = err;
        } else if (m->body[0] == 0 && m->body[1] == 1 && gate > 0) {
            double err_ticks = gate - edges * F_CPU / f_hz; /* measured span vs true span */
            recip++;
            recip_ok += fabs(err_ticks) <= 1.0 + 8.0;      /* ±1 tick, +[sim] instruction boundaries */
            if (fabs(err_ticks) > fabs(worst_r)) worst_r = err_ticks;
            samples += proto_get32(m->body + 18);
            high += proto_get32(m->body + 22);
        }
    }
    check(gated >= 6 && gated_ok == gated, "%s: %d/%d gated windows within ±%.2f counts of f·gate (worst %+.2f)%s",
          name, gated_ok, gated, tol_g, worst_g, f_hz > 6.4e6 ? " [sim: above the silicon limit]" : "");
    check(recip >= 6 && recip_ok == recip, "%s: %d/%d reciprocal windows within ±9 ticks of cycles/f (worst %+.1f)",
          name, recip_ok, recip, worst_r);
    double p = samples ? (double)high / samples : -1, sigma = samples ? sqrt(duty * (1 - duty) / samples) : 1;
    if (f_hz > 2e6) /* [sim] pins change only at instruction boundaries: a 2.7-cycle period has no duty */
        printf("INFO %s: sampled duty %.4f (not checked above 2 MHz in simulation)\n", name, p);
    else check(samples > 1000 && fabs(p - duty) <= 3.0 * sigma + 0.01,
          "%s: sampled duty %.4f from %llu samples vs driven %.3f (3σ = %.4f, +0.01 for the [sim] 1-cycle pin grid)",
          name, p, (unsigned long long)samples, duty, 3 * sigma);
    truthf("scenario count\nfrequency_hz %.6f\nduty %.6f\n", f_hz, duty);
    sim_close(OUT, name, truth);
}

/* Per-edge timestamps of a slow clock with known duty and injected jitter. */
static void scenario_stamps(void) {
    const char *name = "stamps";
    const double f = 4567.8, duty = 0.3, jitter_ns = 40.0;
    truth[0] = 0;
    sim_open(ELF, OUT, name);
    run_ms(2);
    configure(0, CFG_EDGE_MODE, 0);
    clock_start(f, duty, jitter_ns);
    command(MSG_START, NULL, 0, 0);
    run_ms(600);
    /* compare every stamp with the driven edge it stands for: tick = cycle − offset */
    int stamps = 0, matched = 0, level_ok = 0, batches = 0;
    long long offset = 0;
    bool have_offset = false;
    double worst = 0;
    int j = 0;
    for (int i = 0; i < S.n_msgs; i++) {
        msg_t *m = &S.msgs[i];
        if (m->type != MSG_EDGES) continue;
        batches++;
        uint64_t ts[PROTO_MAX_FRAME];
        int count = batch_ticks(m, ts, PROTO_MAX_FRAME);
        for (int k = 0; k < count; k++) {
            uint64_t t = ts[k];
            int level = m->body[1] ^ (k & 1);
            if (!have_offset) {
                /* tick 0 is when Timer1 started: find the driven edge whose gaps to the next
                 * ones match this batch's deltas (the jittered gaps identify it) */
                for (int c = 0; c + 3 < S.n_edges && !have_offset; c++) {
                    long long off = (long long)S.edges[c] - (long long)t;
                    if (off < 0 || off > 100000) continue;
                    if (k + 2 < count &&
                        llabs((long long)(S.edges[c + 1] - S.edges[c]) - (long long)(ts[k + 1] - t)) <= 4 &&
                        llabs((long long)(S.edges[c + 2] - S.edges[c + 1]) - (long long)(ts[k + 2] - ts[k + 1])) <= 4) {
                        offset = off;
                        have_offset = true;
                        j = c;
                    }
                }
                if (!have_offset) break;
            }
            while (j < S.n_edges && (long long)S.edges[j] - offset < (long long)t - 100) j++;
            stamps++;
            if (j < S.n_edges) {
                double e = (double)((long long)t - ((long long)S.edges[j] - offset));
                if (fabs(e) > fabs(worst)) worst = e;
                /* capture sync + [sim] instruction boundaries, against an offset itself found to ±4 */
                matched += fabs(e) <= 8.0;
                /* even driven indices rise (the clock starts low) */
                level_ok += level == ((j % 2) == 0);
            }
        }
    }
    check(stamps > 2000 && matched == stamps,
          "%s: %d/%d stamps within ±8 ticks of the driven edge (worst %+.0f) in %d batches", name, matched, stamps,
          worst, batches);
    check(level_ok == stamps, "%s: every stamp's polarity matches the driven edge", name);
    if (getenv("HARNESS_DEBUG")) {
        FILE *e = fopen("/tmp/stamps.edges", "w");
        for (int k = 0; k < S.n_edges; k++) fprintf(e, "%llu\n", (unsigned long long)S.edges[k]);
        fclose(e);
    }
    truthf("scenario stamps\nfrequency_hz %.6f\nduty %.6f\njitter_ns %.3f\n", f, duty, jitter_ns);
    sim_close(OUT, name, truth);
}

/* Per-edge stamps at the stated limit lose nothing; far above it the loss is reported, never
 * hidden. */
static void scenario_overrun(const char *name, double f_hz, bool expect_loss) {
    truth[0] = 0;
    sim_open(ELF, OUT, name);
    run_ms(2);
    configure(0, CFG_EDGE_MODE, 0);
    clock_start(f_hz, 0.5, 0.0);
    command(MSG_START, NULL, 0, 0);
    run_ms(1100);
    int lost_batches = 0, logs = 0;
    uint32_t dropped = 0;
    uint16_t ovf = 0;
    for (int i = 0; i < S.n_msgs; i++) {
        msg_t *m = &S.msgs[i];
        if (m->type == MSG_EDGES && (m->body[2] & 1)) lost_batches++;
        if (m->type == MSG_LOG && m->body[0] == 1) logs++;
        if (m->type == MSG_STATUS) dropped = proto_get32(m->body + 12), ovf = proto_get16(m->body + 20);
    }
    if (!expect_loss) {
        check(lost_batches == 0 && dropped == 0 && ovf == 0 && logs == 0,
              "%s: %.0f kHz clock (%.0f k edges/s, the stated limit of 40 k): no edge lost (%d flagged batches, %u dropped)",
              name, f_hz / 1e3, 2 * f_hz / 1e3, lost_batches, dropped);
        truthf("scenario overrun\nfrequency_hz %.1f\n", f_hz);
        sim_close(OUT, name, truth);
        return;
    }
    check(lost_batches > 0, "%s: %.0f kHz clock: %d edge batches flagged 'lost before'", name, f_hz / 1e3, lost_batches);
    check(dropped > 0 && ovf > 0, "%s: STATUS counts %u dropped edges, %u overflow events", name, dropped, ovf);
    check(logs > 0, "%s: a warning LOG names the cause", name);
    truthf("scenario overrun\nfrequency_hz %.1f\n", f_hz);
    sim_close(OUT, name, truth);
}

static const double DIVIDER = (47.0 + 9.1) / 9.1;

/* Rails: calibrated ADC readings, stored calibration, and a sag. */
static void scenario_rails(void) {
    const char *name = "rails";
    const double rail_mv[4] = {4900.0, 4750.0, 5100.0, 3300.0};
    truth[0] = 0;
    sim_open(ELF, OUT, name);
    for (int i = 0; i < 4; i++) set_adc_mv(i, rail_mv[i] / DIVIDER);
    run_ms(2);
    /* [sim] simavr scales by 1023 counts per 1.1 V: the calibration a user would find with a meter */
    int32_t scale = (int32_t)lround(1100.0 / 1023.0 * DIVIDER * 1e6); /* µV per count × 1000 */
    bool cal_ok = true;
    for (int i = 0; i < 4; i++) cal_ok &= ack_is(configure((uint8_t)(8 + i), CFG_CAL_SCALE, (uint32_t)scale), ACK_OK, (uint32_t)scale);
    check(cal_ok, "%s: calibration scale %d set on 4 channels", name, scale);
    /* the calibration survives a reset (EEPROM) */
    int before = S.n_msgs;
    avr_reset(S.avr);
    for (int i = 0; i < 4; i++) set_adc_mv(i, rail_mv[i] / DIVIDER);
    run_ms(5);
    int h = find_msg(MSG_HELLO, before);
    bool stored = false;
    if (h >= 0) {
        uint8_t *b = S.msgs[h].body;
        uint16_t o = (uint16_t)(20 + 1 + b[20] + 1);
        for (int c = 0; c < 9; c++) {
            uint8_t kind = b[o + 1], ll = b[o + 3];
            o = (uint16_t)(o + 4 + ll);
            if (kind == 3) {
                stored = proto_get32(b + o) == (uint32_t)scale && proto_get32(b + o + 4) == 1000;
                o += 12;
            }
        }
    }
    check(stored, "%s: HELLO after reset carries the stored calibration", name);
    command(MSG_START, NULL, 0, 0);
    run_ms(300);
    set_adc_mv(1, 4400.0 / DIVIDER); /* RAIL1 sags to 4.40 V for 40 ms */
    run_ms(40);
    set_adc_mv(1, rail_mv[1] / DIVIDER);
    run_ms(300);
    int within[4] = {0}, n[4] = {0};
    double worst[4] = {0};
    for (int i = 0; i < S.n_msgs; i++) {
        msg_t *m = &S.msgs[i];
        if (m->type != MSG_ANALOG) continue;
        int c = m->body[0] - 8;
        uint16_t cnt = proto_get16(m->body + 2);
        for (uint16_t k = 0; k < cnt && c >= 0 && c < 4; k++) {
            double mv = proto_get16(m->body + 16 + 2 * k) * (double)scale / 1000.0 / 1000.0;
            double err = mv - rail_mv[c];
            if (c == 1 && fabs(mv - 4400.0) < 1.1 * 1100.0 / 1023.0 * DIVIDER) continue; /* the sag */
            n[c]++;
            within[c] += fabs(err) <= 1100.0 / 1023.0 * DIVIDER; /* 1 LSB at the rail */
            if (fabs(err) > fabs(worst[c])) worst[c] = err;
        }
    }
    for (int c = 0; c < 4; c++)
        check(n[c] > 100 && within[c] == n[c], "%s: RAIL%d %d/%d samples within 1 LSB (6.6 mV) of %.0f mV (worst %+.1f)",
              name, c, within[c], n[c], rail_mv[c], worst[c]);
    truthf("scenario rails\n");
    for (int c = 0; c < 4; c++) truthf("rail RAIL%d %.1f\n", c, rail_mv[c]);
    truthf("sag RAIL1 4400.0 40\n");
    sim_close(OUT, name, truth);
}

static void add_line(double ms, char port, int pin, int level) {
    S.line_ev[S.n_line].cycle = (uint64_t)(ms * 1e-3 * F_CPU);
    S.line_ev[S.n_line].port = port;
    S.line_ev[S.n_line].pin = pin;
    S.line_ev[S.n_line].level = level;
    S.n_line++;
}

/* Line inputs: reset pulse, heartbeat at 10 Hz, fault rising; each change with its time. */
static void scenario_lines(void) {
    const char *name = "lines";
    truth[0] = 0;
    sim_open(ELF, OUT, name);
    run_ms(2);
    /* changes before START are not reported, and do not count as dropped */
    avr_irq_t *hb = avr_io_getirq(S.avr, AVR_IOCTL_IOPORT_GETIRQ('B'), 1);
    for (int k = 0; k < 40; k++) {
        avr_raise_irq(hb, (uint32_t)((k & 1) ^ 1)); /* ends low, as the schedule below expects */
        run_ms(0.5);
    }
    command(MSG_START, NULL, 0, 0);
    uint64_t base = S.avr->cycle;
    /* (ms after START) heartbeat PB1 toggles every 50 ms; reset PD2 high 5 ms at 100 ms; fault PD3 at 420 ms */
    for (int k = 0; k < 12; k++) add_line(20.0 + 50.0 * k, 'B', 1, (k + 1) % 2);
    add_line(100.0, 'D', 2, 1);
    add_line(105.0, 'D', 2, 0);
    add_line(420.0, 'D', 3, 1);
    /* sort by time */
    for (int a = 0; a < S.n_line; a++)
        for (int b = a + 1; b < S.n_line; b++)
            if (S.line_ev[b].cycle < S.line_ev[a].cycle) {
                __typeof__(S.line_ev[0]) t = S.line_ev[a];
                S.line_ev[a] = S.line_ev[b];
                S.line_ev[b] = t;
            }
    for (int a = 0; a < S.n_line; a++) S.line_ev[a].cycle += base;
    avr_cycle_timer_register(S.avr, S.line_ev[0].cycle - S.avr->cycle, line_toggle, NULL);
    run_ms(700);
    /* offset tick ↔ cycle: from a STATUS (uptime) is too coarse; use the first stamped event */
    int events = 0, ok = 0;
    long long offset = -1;
    double worst = 0;
    for (int i = 0; i < S.n_msgs; i++) {
        msg_t *m = &S.msgs[i];
        if (m->type != MSG_LINES) continue;
        uint8_t ch = m->body[0];
        uint64_t ts[64];
        int count = batch_ticks(m, ts, 64);
        for (int k = 0; k < count; k++) {
            uint64_t t = ts[k];
            int level = m->body[1] ^ (k & 1);
            char port = ch == 4 ? 'B' : 'D';
            int pin = ch == 2 ? 2 : ch == 3 ? 3 : 1;
            /* nearest driven event on that pin with that level */
            double best = 1e18;
            for (int e = 0; e < S.n_line; e++) {
                if (S.line_ev[e].port != port || S.line_ev[e].pin != pin || S.line_ev[e].level != level) continue;
                if (offset < 0) offset = (long long)S.line_ev[e].cycle - (long long)t;
                double err = (double)((long long)t - ((long long)S.line_ev[e].cycle - offset));
                if (fabs(err) < fabs(best)) best = err;
            }
            events++;
            ok += fabs(best) <= 800.0; /* interrupt latency, other handlers first: 50 µs */
            if (fabs(best) > fabs(worst)) worst = best;
        }
    }
    uint32_t dropped = 0;
    for (int i = 0; i < S.n_msgs; i++)
        if (S.msgs[i].type == MSG_STATUS) dropped = proto_get32(S.msgs[i].body + 12);
    check(dropped == 0, "%s: 40 changes before START neither reported nor counted as dropped", name);
    check(events == S.n_line && ok == events,
          "%s: %d/%d driven line changes reported, %d within 800 ticks of their time (worst %+.0f)", name, events,
          S.n_line, ok, worst);
    truthf("scenario lines\nheartbeat_hz 10\nreset_pulses 1\nfault_rises 1\n");
    sim_close(OUT, name, truth);
}

/* The probe behind a pseudo-terminal for a host program, paced to about real time. */
static int serve(const char *elf, double seconds, double f_hz, bool stamps) {
    static uart_pty_t pty;
    sim_open(elf, "/tmp", "simavr-serve");
    if (!stamps) wire_reciprocal(); /* the probe starts in count-window mode */
    uart_pty_init(S.avr, &pty);
    uart_pty_connect(&pty, '0');
    uint32_t flags = 0; /* the bridge sets its own UART flags: clear the slow ones again */
    avr_ioctl(S.avr, AVR_IOCTL_UART_GET_FLAGS('0'), &flags);
    flags &= ~(uint32_t)(AVR_UART_FLAG_POLL_SLEEP | AVR_UART_FLAG_STDIO);
    avr_ioctl(S.avr, AVR_IOCTL_UART_SET_FLAGS('0'), &flags);
    clock_start(f_hz, 0.5, 0.0);
    printf("serving on /tmp/simavr-uart0 for %.1f s\n", seconds);
    fflush(stdout);
    struct timespec t0, now;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    for (;;) {
        clock_gettime(CLOCK_MONOTONIC, &now);
        double wall = (now.tv_sec - t0.tv_sec) + (now.tv_nsec - t0.tv_nsec) * 1e-9;
        if (wall >= seconds) break;
        double sim = S.avr->cycle / F_CPU;
        if (sim > wall) {
            struct timespec d = {0, 1000000};
            nanosleep(&d, NULL);
            continue;
        }
        run_until(S.avr->cycle + 16000);
    }
    fclose(S.bin);
    _exit(0); /* uart_pty_stop() does not return in simavr 1.6 */
}

int main(int argc, char **argv) {
    if ((argc == 5 || argc == 6) && !strcmp(argv[1], "--serve"))
        return serve(argv[2], atof(argv[3]), atof(argv[4]), argc == 6 && !strcmp(argv[5], "stamps"));
    if (argc != 4) {
        fprintf(stderr, "usage: %s FIRMWARE.elf VECTORS.vec OUTDIR\n", argv[0]);
        return 2;
    }
    ELF = argv[1];
    OUT = argv[3];
    vector_selftest(argv[2]);
    scenario_commands();
    scenario_count("count-51k", 51234.5, 0.5);
    scenario_count("count-1m2", 1234567.8, 0.3);
    scenario_count("count-5m9", 5987654.3, 0.6);
    scenario_stamps();
    scenario_overrun("stamps-limit", 20011.3, false);
    scenario_overrun("overrun", 400000.0, true);
    scenario_rails();
    scenario_lines();
    printf("%d checks, %d failed\n", checks, failures);
    return failures ? 1 : 0;
}
