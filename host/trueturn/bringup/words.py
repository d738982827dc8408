"""The bring-up check's findings in plain words: what was seen, and the fix. The one place."""

from __future__ import annotations

from trueturn.bringup.judge import Finding, Item

ITEM_NAMES = {
    Item.IDENTITY: "board", Item.LINK: "link", Item.REFERENCE: "reference",
    Item.DC_LEVEL: "level", Item.NOISE: "noise", Item.CLIPPING: "clipping",
    Item.FLOATING: "connected", Item.TACH_RATE: "tach speed", Item.TACH_EDGES: "tach edges",
    Item.TACH_JITTER: "tach jitter", Item.TACH_CHATTER: "tach chatter",
    Item.TACH_DUTY: "tach duty",
}


def item_name(f: Finding) -> str:
    """``pickup 1 level`` or ``tach speed``."""
    base = ITEM_NAMES[f.item]
    return f"pickup {f.channel + 1} {base}" if f.channel is not None else base


def finding_text(f: Finding) -> tuple[str, str]:
    """(what was seen, what to do: empty when it passed)."""
    v = f.values
    it, code = f.item, f.code
    if it is Item.IDENTITY:
        return "answers as trueturn, same protocol as this host", ""
    if it is Item.LINK:
        if code == "ok":
            return f"{v['frames']:.0f} frames, none bad or lost", ""
        if code == "restarted":
            return ("the board restarted during the check",
                    "check the USB lead and the board's power (a loose lead, a weak hub)")
        return (f"{v['frames_bad']:.0f} bad and {v['frames_lost']:.0f} lost frames, "
                f"{v['samples_lost']:.0f} samples lost, {v['board_lost']:.0f} dropped on the board "
                f"(error rate {v['error_rate']:.2%})",
                "use a short USB lead straight into the laptop (no hub), another USB port; "
                "keep the lead away from the motor's wires")
    if it is Item.REFERENCE:
        if code.startswith("aref"):
            seen = (f"AREF measured {v['reference_v']:.2f} V (the firmware's AREF build; the "
                    "board's bandgap makes this ±9 %)")
            if code == "aref":
                return seen, ""
            if code == "aref_low":
                return (seen + f", below {v['low_v']:.1f} V",
                        "AREF is open or not fed: wire AREF to the pickups' 3.3 V rail "
                        "(hardware/WIRING.md), or flash the standard image")
            return (seen + f", above {v['high_v']:.1f} V",
                    "AREF must not exceed the board's 5 V: feed it from the pickups' 3.3 V rail")
        if code == "nominal":
            return (f"the ADC measures against AVCC, {v['reference_v']:.2f} V as designed (not "
                    "measured): readings in volts move with the USB supply", "")
        seen = (f"AVCC measured {v['reference_v']:.2f} V (the USB supply; the board's bandgap "
                "makes this ±9 %)")
        if code == "measured":
            return seen, ""
        if code == "low":
            return (seen + f", below {v['low_v']:.1f} V",
                    "a weak USB port, a hub or a long thin lead: plug straight into the "
                    "laptop with a short lead; the pickups' 3.3 V regulators need headroom")
        return (seen + f", above {v['high_v']:.2f} V",
                "the board is fed from something other than USB 5 V: feed it from USB only")
    if it is Item.DC_LEVEL:
        level = f"{v['level_v']:.2f} V"
        if code == "at_ground":
            return (f"{level}: no pickup signal",
                    "the module has no power or its output is shorted to ground: check VCC "
                    "(3.3 V), GND and OUT at the module and at the board's pin")
        if code == "at_reference":
            return (f"{level}: stuck at the top of the scale",
                    "the input is tied to 5 V or the module runs from 5 V: power it from 3.3 V "
                    "and check OUT goes to the pin (WIRING.md)")
        if code == "unexpected_level":
            return (f"{level}, {v['g']:+.1f} g from the module's zero-g level "
                    f"({v['zero_g_v']:.2f} V)",
                    "not the recommended ±3 g module at 3.3 V, or wired to 5 V: check the "
                    "supply pin, and give the pickup's own zero-g level and sensitivity")
        where = {"gravity_up": "gravity along this axis (it points up)",
                 "gravity_down": "gravity along this axis (it points down)",
                 "horizontal": "no gravity on this axis (it lies horizontal)",
                 "tilted": "this axis is tilted"}[code]
        return f"{level} ({v['g']:+.2f} g): {where}", ""
    if it is Item.NOISE:
        seen = f"floor {v['floor_counts']:.1f} counts rms ({v['floor_mv']:.1f} mV)"
        if code == "ok":
            return seen, ""
        return (f"{seen}, over {v['limit_counts']:.0f} counts",
                "shielded cable with the shield at the board's GND only, away from motor "
                "leads; twist signal and ground together; an RC filter at the pin only for "
                "buffered pickups (WIRING.md)")
    if it is Item.CLIPPING:
        if code == "ok":
            return "never at either end of the ADC's range", ""
        return (f"{v['clipped']:.0f} samples ({v['share']:.1%}) at the end of the ADC's range",
                "the signal saturates: a rough machine for a ±3 g module, or a wrong offset; "
                "mount the pickup on a stiffer spot or use a pickup with more range")
    if it is Item.FLOATING:
        if code == "ok":
            return "its own signal (not a copy of the other input)", ""
        return (f"a ghost copy of the other input (coherence {v['coherence']:.2f}): nothing "
                "is connected to it",
                "connect the pickup's OUT to this pin, or measure with one channel "
                "(`--channels 1`; in the app, a machine profile with one pickup)")
    if it is Item.TACH_RATE:
        if code == "ok":
            return f"{v['speed_rpm']:.0f} rpm ({v['edges_per_s']:.1f} edges a second)", ""
        if code == "no_edges":
            return (f"no tach edges in {v['seconds']:.0f} s",
                    "run the machine during the check; aim the sensor at the mark (a few mm, "
                    "square to the shaft); check its VCC, GND and OUT to D8; its LED should "
                    "blink as the mark passes")
        return (f"only {v['edges']:.0f} tach edges in {v['seconds']:.0f} s",
                "run the machine at speed during the check (at least a few turns a second)")
    if it is Item.TACH_EDGES:
        if code == "ok":
            return f"one clean edge per turn over {v['revolutions']:.0f} turns", ""
        if code == "double":
            return (f"{v['double']:.0f} extra edges (two per turn)",
                    "something else on the shaft reflects too (a scratch, a bright bolt head, "
                    "dirt): cover it with matt black tape, or move the mark or the sensor")
        if code == "missing":
            return (f"{v['missing']:.0f} missed edges",
                    "the sensor misses the mark now and then: a bigger or cleaner mark, the "
                    "sensor closer (a few mm) and square to it, its sensitivity turned up")
        return (f"{v['uneven']:.0f} turns with an edge early or late",
                "the mark is smudged, peeling or ragged at its edge: clean it or put on a "
                "fresh one with a crisp straight edge")
    if it is Item.TACH_JITTER:
        seen = f"edge timing scatter {v['scatter_deg']:.2f}°"
        if code == "ok":
            return seen, ""
        return (f"{seen}, over {v['limit_deg']:.1f}°",
                "a wobbly sensor mount or a dull mark: fasten the sensor rigidly, use a "
                "crisp reflective mark")
    if it is Item.TACH_CHATTER:
        if code == "ok":
            return "no bursts of extra edges", ""
        return (f"{v['suppressed']:.0f} bursts of extra edges at the mark (dropped by the "
                "board's hold-off)",
                "the sensor's output bounces as the mark's edge passes: use a tach module "
                "with hysteresis (a comparator with hysteresis or a Schmitt-trigger buffer), "
                "a shorter cable, a crisper mark")
    if it is Item.TACH_DUTY:
        if code == "no_falling_edges":
            return ("no falling edges heard", "run the machine during the check")
        seen = f"the sensor sees the mark {v['duty']:.0%} of a turn ({v['mark_deg']:.0f}°)"
        if code == "ok":
            return seen, ""
        if code == "narrow":
            return seen, ("the sensor barely sees the mark: a wider mark, or the sensor "
                          "closer and its sensitivity turned up")
        return seen, ("the sensor sees 'mark' most of the turn: turn its sensitivity down, "
                      "or put matt black tape around the mark")
    return f"{it.value}: {code}", ""
