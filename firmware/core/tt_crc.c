/* tt_crc.c - CRC-16/IBM-3740 over a buffer. */
#include "tt_crc.h"

#if defined(__AVR__)
#include <util/crc16.h>
uint16_t tt_crc16_update_avr(uint16_t crc, uint8_t byte)
{
    return _crc_xmodem_update(crc, byte);
}
#endif

uint16_t tt_crc16(const uint8_t *data, size_t len)
{
    uint16_t crc = TT_CRC_INIT;
    size_t i;
    for (i = 0; i < len; i++) {
        crc = tt_crc16_update(crc, data[i]);
    }
    return (uint16_t)(crc ^ TT_CRC_XOROUT);
}
