/* tt_command.h - what the board does with a received host frame: which reply, which error
 * code, which action. Portable, so the whole command logic is tested on the host. */
#ifndef TT_COMMAND_H
#define TT_COMMAND_H

#include <stdint.h>

#include "tt_frame.h"
#include "tt_protocol_defs.h"

/* Limits of the sampling hardware, checked by configure. */
struct tt_limits {
    uint32_t tick_hz;
    uint16_t min_rate_hz;
    uint16_t max_rate_hz;
    uint8_t max_channels;
    uint16_t min_period_ticks; /* conversion time plus interrupt margin */
};

/* A checked stream set-up. */
struct tt_setup {
    uint16_t rate_hz;
    uint8_t channels;
    uint8_t tach_edge;      /* 0 = falling, 1 = rising */
    uint16_t period_ticks;  /* ticks between two conversions (any channel) */
};

enum tt_action {
    TT_ACT_NONE = 0,  /* reply only (an error) */
    TT_ACT_IDENTIFY,  /* reply, then identity */
    TT_ACT_START,     /* reply, then stream_config with the start tick, then stream */
    TT_ACT_STOP,      /* stop streaming, then reply */
    TT_ACT_CONFIGURE, /* take cmd->setup, reply, then stream_config */
    TT_ACT_PING       /* reply, then pong with cmd->token */
};

struct tt_command {
    uint8_t type;     /* echoed in the reply */
    uint8_t seq;
    uint8_t error;    /* TT_ERR_* */
    uint8_t action;   /* enum tt_action; TT_ACT_NONE unless error is TT_ERR_OK */
    struct tt_setup setup;
    uint32_t token;
};

/* Check configure's values against the limits: rate within limits, 1..max channels, edge 0/1,
 * tick_hz / (rate * channels) a whole number of ticks of at least min_period_ticks.
 * Returns TT_ERR_OK (and fills out) or TT_ERR_BAD_VALUE. */
uint8_t tt_setup_check(const struct tt_configure *c, const struct tt_limits *lim,
                       struct tt_setup *out);

/* Decide the answer to a decoded frame given the device state (TT_STATE_*).
 * Returns 1 and fills cmd if a reply is due; returns 0 if the frame failed COBS, CRC or
 * length-of-frame checks (the caller counts it in rx_bad_frames and does not answer, since
 * type and seq cannot be trusted). */
uint8_t tt_command_parse(enum tt_frame_status st, const struct tt_frame *f, uint8_t state,
                         const struct tt_limits *lim, struct tt_command *cmd);

#endif /* TT_COMMAND_H */
