/* tt_cobs.h - Consistent Overhead Byte Stuffing (Cheshire & Baker, IEEE/ACM ToN 1999),
 * the framing of protocol v1: no 0x00 inside a frame, 0x00 ends it. */
#ifndef TT_COBS_H
#define TT_COBS_H

#include <stddef.h>
#include <stdint.h>

/* Largest encoded size of n input bytes (without the 0x00 delimiter). */
#define TT_COBS_MAX_ENCODED(n) ((n) + ((n) / 254u) + 1u)

/* Encode in[0..n) into out (capacity >= TT_COBS_MAX_ENCODED(n)); returns the encoded length
 * (no delimiter written). */
size_t tt_cobs_encode(const uint8_t *in, size_t n, uint8_t *out);

/* Encode in[0..n) plus the 0x00 delimiter into a 256-byte ring starting at index head
 * (indices wrap at 256); returns the number of bytes written. The caller checks room first. */
uint8_t tt_cobs_encode_ring(const uint8_t *in, uint8_t n, uint8_t *ring256, uint8_t head);

/* Decode buf[0..n) in place; returns the decoded length, or -1 if the body is not valid COBS
 * (a zero byte inside, or a code byte pointing past the end). */
int tt_cobs_decode(uint8_t *buf, size_t n);

#endif /* TT_COBS_H */
