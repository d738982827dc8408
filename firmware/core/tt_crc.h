/* tt_crc.h - CRC-16/IBM-3740 (poly 0x1021, init 0xFFFF, no reflection, xorout 0),
 * the frame check of protocol v1 (catalogue check value 0x29B1 for "123456789"). */
#ifndef TT_CRC_H
#define TT_CRC_H

#include <stddef.h>
#include <stdint.h>

#include "tt_protocol_defs.h"

/* Fold one byte into a running CRC (start from TT_CRC_INIT). */
static inline uint16_t tt_crc16_update(uint16_t crc, uint8_t byte)
{
#if defined(__AVR__)
    /* avr-libc's hand-written XMODEM step: same polynomial, no reflection. */
    extern uint16_t tt_crc16_update_avr(uint16_t crc, uint8_t byte);
    return tt_crc16_update_avr(crc, byte);
#else
    uint8_t bit;
    crc ^= (uint16_t)((uint16_t)byte << 8);
    for (bit = 0; bit < 8u; bit++) {
        crc = (crc & 0x8000u) ? (uint16_t)((crc << 1) ^ TT_CRC_POLY) : (uint16_t)(crc << 1);
    }
    return crc;
#endif
}

/* CRC of a whole buffer. */
uint16_t tt_crc16(const uint8_t *data, size_t len);

#endif /* TT_CRC_H */
