/* tt_frame.h - protocol v1 frames: COBS(type | seq | payload | CRC-16 big-endian) 0x00. */
#ifndef TT_FRAME_H
#define TT_FRAME_H

#include <stddef.h>
#include <stdint.h>

#include "tt_protocol_defs.h"

/* Why a received body was rejected; the names match the host codec's FRAME_ERRORS. */
enum tt_frame_status {
    TT_FRAME_OK = 0,
    TT_FRAME_COBS,
    TT_FRAME_TOO_SHORT,
    TT_FRAME_TOO_LONG,
    TT_FRAME_CRC,
    TT_FRAME_UNKNOWN_TYPE,
    TT_FRAME_BAD_LENGTH
};

/* Longest COBS body (delimiter excluded) that can hold a TT_MAX_FRAME_BYTES frame. */
#define TT_MAX_ENCODED_BYTES (TT_MAX_FRAME_BYTES + 1u + TT_MAX_FRAME_BYTES / 254u)

/* A decoded frame; payload points into the caller's (decoded in place) buffer. */
struct tt_frame {
    uint8_t type;
    uint8_t seq;
    uint8_t dir;          /* TT_DIR_DEVICE or TT_DIR_HOST (valid when the type is known) */
    uint8_t payload_len;
    const uint8_t *payload;
};

/* Decode one COBS body (without its 0x00) in place. On TT_FRAME_OK every field of out is
 * set; on TT_FRAME_UNKNOWN_TYPE and TT_FRAME_BAD_LENGTH type and seq are set (the CRC
 * passed, so the board can answer). Checks, in order: encoded length, COBS, frame length,
 * CRC, type, payload length (and the sample-block rules of the samples message). */
enum tt_frame_status tt_frame_decode(uint8_t *body, size_t n, struct tt_frame *out);

/* Name of a status as in the host codec ("cobs", "crc", ...); "ok" for TT_FRAME_OK. */
const char *tt_frame_status_name(enum tt_frame_status st);

/* Append the CRC to raw = type | seq | payload[payload_len]; returns the raw frame length. */
size_t tt_frame_seal(uint8_t *raw, size_t payload_len);

/* COBS-encode a sealed raw frame into out and add the 0x00 delimiter; returns the wire length.
 * out needs TT_COBS_MAX_ENCODED(raw_len) + 1 bytes. */
size_t tt_frame_wire(const uint8_t *raw, size_t raw_len, uint8_t *out);

#endif /* TT_FRAME_H */
