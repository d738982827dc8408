/* tt_rx.h - splits received bytes into COBS bodies at each 0x00 delimiter. A body longer than
 * the buffer is reported once as too long and skipped up to the next delimiter, so the
 * receiver resynchronises on the next frame. */
#ifndef TT_RX_H
#define TT_RX_H

#include <stdint.h>

enum tt_rx_result { TT_RX_MORE = 0, TT_RX_BODY = 1, TT_RX_TOO_LONG = 2 };

struct tt_rx {
    uint8_t *buf;
    uint16_t cap;
    uint16_t len;
    uint8_t discarding;
};

void tt_rx_init(struct tt_rx *rx, uint8_t *buf, uint16_t cap);

/* Feed one byte. TT_RX_BODY: buf[0..len) holds a complete body; decode it, then call
 * tt_rx_done(). TT_RX_TOO_LONG: a body overflowed the buffer and is being skipped. */
enum tt_rx_result tt_rx_byte(struct tt_rx *rx, uint8_t byte);

static inline void tt_rx_done(struct tt_rx *rx)
{
    rx->len = 0;
}

#endif /* TT_RX_H */
