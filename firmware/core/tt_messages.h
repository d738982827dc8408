/* tt_messages.h - builders of every protocol message into a raw frame buffer.
 * Each returns the sealed raw frame length (type | seq | payload | CRC); pass the result to
 * tt_frame_wire() or tt_cobs_encode_ring(). raw needs TT_OVERHEAD_BYTES + payload bytes. */
#ifndef TT_MESSAGES_H
#define TT_MESSAGES_H

#include <stddef.h>
#include <stdint.h>

#include "tt_protocol_defs.h"

/* Largest number of samples in one samples message (SPEC 4.4: 1..118). */
#define TT_SAMPLES_MAX_PER_MESSAGE 118u

size_t tt_msg_identity(uint8_t *raw, uint8_t seq, const struct tt_identity *v);
size_t tt_msg_reply(uint8_t *raw, uint8_t seq, uint8_t command_type, uint8_t command_seq,
                    uint8_t error);
size_t tt_msg_stream_config(uint8_t *raw, uint8_t seq, const struct tt_stream_config *v);
size_t tt_msg_samples(uint8_t *raw, uint8_t seq, uint32_t first_index, uint8_t channels,
                      uint32_t start_tick, uint16_t period_ticks, const uint16_t *samples,
                      uint8_t count);
size_t tt_msg_tach(uint8_t *raw, uint8_t seq, uint32_t tick, uint16_t edge_count);
size_t tt_msg_status(uint8_t *raw, uint8_t seq, const struct tt_status *v);
size_t tt_msg_pong(uint8_t *raw, uint8_t seq, uint32_t token, uint32_t tick);
/* host commands (used by host-side tests and tools) */
size_t tt_msg_empty(uint8_t *raw, uint8_t type, uint8_t seq);
size_t tt_msg_configure(uint8_t *raw, uint8_t seq, const struct tt_configure *v);
size_t tt_msg_ping(uint8_t *raw, uint8_t seq, uint32_t token);

#endif /* TT_MESSAGES_H */
