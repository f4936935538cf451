/* The few RP2040 registers this probe uses, written from the RP2040 data sheet (Raspberry Pi,
 * "RP2040 Datasheet": chapter 2 "System Description" for RESETS, CLOCKS, XOSC, PLL, TIMER;
 * chapter 2.5 DMA; chapter 2.19 GPIO; chapter 3 PIO; chapter 4.2 UART). No SDK. */
#ifndef SLACKMETER_RP2040_H
#define SLACKMETER_RP2040_H

#include <stdint.h>

#define REG(addr) (*(volatile uint32_t *)(uintptr_t)(addr))
/* atomic register aliases (data sheet 2.1.2): +0x1000 XOR, +0x2000 set, +0x3000 clear */
#define REG_SET(addr) REG((addr) + 0x2000u)
#define REG_CLR(addr) REG((addr) + 0x3000u)

/* RESETS */
#define RESETS_BASE 0x4000C000u
#define RESETS_RESET (RESETS_BASE + 0x0u)
#define RESETS_DONE (RESETS_BASE + 0x8u)
#define RST_DMA (1u << 2)
#define RST_IO_BANK0 (1u << 5)
#define RST_PADS_BANK0 (1u << 8)
#define RST_PIO0 (1u << 10)
#define RST_PLL_SYS (1u << 12)
#define RST_TIMER (1u << 21)
#define RST_UART0 (1u << 22)

/* CLOCKS */
#define CLOCKS_BASE 0x40008000u
#define CLK_REF_CTRL (CLOCKS_BASE + 0x30u)
#define CLK_REF_SELECTED (CLOCKS_BASE + 0x38u)
#define CLK_SYS_CTRL (CLOCKS_BASE + 0x3Cu)
#define CLK_SYS_SELECTED (CLOCKS_BASE + 0x44u)
#define CLK_PERI_CTRL (CLOCKS_BASE + 0x48u)
#define CLK_ENABLE (1u << 11)

/* XOSC: 12 MHz crystal on the Pico */
#define XOSC_BASE 0x40024000u
#define XOSC_CTRL (XOSC_BASE + 0x0u)
#define XOSC_STATUS (XOSC_BASE + 0x4u)
#define XOSC_STARTUP (XOSC_BASE + 0xCu)
#define XOSC_STABLE (1u << 31)

/* PLL_SYS */
#define PLL_SYS_BASE 0x40028000u
#define PLL_CS (PLL_SYS_BASE + 0x0u)
#define PLL_PWR (PLL_SYS_BASE + 0x4u)
#define PLL_FBDIV_INT (PLL_SYS_BASE + 0x8u)
#define PLL_PRIM (PLL_SYS_BASE + 0xCu)
#define PLL_LOCK (1u << 31)

/* TIMER: 64-bit microsecond counter (raw reads, no latching) */
#define TIMER_BASE 0x40054000u
#define TIMER_RAWH (TIMER_BASE + 0x24u)
#define TIMER_RAWL (TIMER_BASE + 0x28u)

/* IO_BANK0 and PADS_BANK0 */
#define IO_BANK0_BASE 0x40014000u
#define GPIO_CTRL(n) (IO_BANK0_BASE + 4u + 8u * (n))
#define FUNC_UART 2u
#define FUNC_SIO 5u
#define FUNC_PIO0 6u
#define PADS_BANK0_BASE 0x4001C000u
#define PADS_GPIO(n) (PADS_BANK0_BASE + 4u + 4u * (n))
#define PAD_OD (1u << 7)
#define PAD_IE (1u << 6)
#define PAD_PUE (1u << 3)
#define PAD_PDE (1u << 2)
#define PAD_SCHMITT (1u << 1)

/* UART0 (PL011) */
#define UART0_BASE 0x40034000u
#define UART_DR (UART0_BASE + 0x00u)
#define UART_FR (UART0_BASE + 0x18u)
#define UART_IBRD (UART0_BASE + 0x24u)
#define UART_FBRD (UART0_BASE + 0x28u)
#define UART_LCR_H (UART0_BASE + 0x2Cu)
#define UART_CR (UART0_BASE + 0x30u)
#define UART_FR_RXFE (1u << 4)
#define UART_FR_TXFF (1u << 5)

/* PIO0 */
#define PIO0_BASE 0x50200000u
#define PIO_CTRL (PIO0_BASE + 0x000u)
#define PIO_FSTAT (PIO0_BASE + 0x004u)
#define PIO_FDEBUG (PIO0_BASE + 0x008u)
#define PIO_RXF0 (PIO0_BASE + 0x020u)
#define PIO_INSTR_MEM(i) (PIO0_BASE + 0x048u + 4u * (i))
#define PIO_SM0_CLKDIV (PIO0_BASE + 0x0C8u)
#define PIO_SM0_EXECCTRL (PIO0_BASE + 0x0CCu)
#define PIO_SM0_SHIFTCTRL (PIO0_BASE + 0x0D0u)
#define PIO_SM0_INSTR (PIO0_BASE + 0x0D8u)
#define PIO_SM0_PINCTRL (PIO0_BASE + 0x0DCu)
#define PIO_FDEBUG_RXSTALL0 (1u << 0)

/* DMA channels 0 and 1 (stride 0x40) */
#define DMA_BASE 0x50000000u
#define DMA_READ_ADDR(c) (DMA_BASE + 0x40u * (c) + 0x00u)
#define DMA_WRITE_ADDR(c) (DMA_BASE + 0x40u * (c) + 0x04u)
#define DMA_TRANS_COUNT(c) (DMA_BASE + 0x40u * (c) + 0x08u)
#define DMA_CTRL_TRIG(c) (DMA_BASE + 0x40u * (c) + 0x0Cu)
#define DMA_CTRL(c) (DMA_BASE + 0x40u * (c) + 0x10u) /* alias 1: CTRL without trigger */
#define DMA_CHAN_ABORT (DMA_BASE + 0x444u)
#define DMA_EN (1u << 0)
#define DMA_SIZE_WORD (2u << 2)
#define DMA_INCR_WRITE (1u << 5)
#define DMA_RING_SIZE(bits) ((uint32_t)(bits) << 6)
#define DMA_RING_WRITE (1u << 10)
#define DMA_CHAIN_TO(c) ((uint32_t)(c) << 11)
#define DMA_TREQ(t) ((uint32_t)(t) << 15)
#define DMA_IRQ_QUIET (1u << 21)
#define DMA_BUSY (1u << 24)
#define DREQ_PIO0_RX0 4u

/* Cortex-M0+ system control block */
#define SCB_VTOR 0xE000ED08u

#endif
