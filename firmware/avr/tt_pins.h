/* tt_pins.h - the one pin map of the trueturn board (ATmega328P, Uno/Nano class, 16 MHz).
 *
 * The TT_PINMAP_* lines are machine-readable: tests/test_pinmap.py compares them with the
 * table in hardware/WIRING.md. Change a pin here and there together. */
#ifndef TT_PINS_H
#define TT_PINS_H

#define TT_PINMAP_PICKUP_1 "A0"   /* ADC0, channel 0 */
#define TT_PINMAP_PICKUP_2 "A1"   /* ADC1, channel 1 */
#define TT_PINMAP_TACH     "D8"   /* PB0 / ICP1, Timer1 input capture */
#define TT_PINMAP_LED      "D13"  /* PB5, on-board LED */
#define TT_PINMAP_UART_TX  "D1"   /* PD1 / TXD to the USB-serial chip */
#define TT_PINMAP_UART_RX  "D0"   /* PD0 / RXD */

/* Register-level view of the same pins. */
#define TT_PICKUP_1_ADC_CHANNEL 0u  /* ADMUX MUX3..0 for A0 */
#define TT_PICKUP_2_ADC_CHANNEL 1u  /* ADMUX MUX3..0 for A1 */
#define TT_PICKUP_DIDR_BITS ((1u << ADC0D) | (1u << ADC1D)) /* digital input buffers off */

#define TT_TACH_DDR  DDRB
#define TT_TACH_PORT PORTB
#define TT_TACH_BIT  PB0            /* ICP1: the only pin Timer1 can time-stamp in hardware */
#define TT_TACH_ARDUINO_PIN 8u      /* reported in identity.tach_pin */

#define TT_LED_DDR  DDRB
#define TT_LED_PORT PORTB
#define TT_LED_BIT  PB5

#endif /* TT_PINS_H */
