"""`trueturn solve`: correction masses from balancing runs (READINGS file, YAML or JSON)."""

from __future__ import annotations

import argparse
import dataclasses
import sys
from typing import Any

from trueturn.angles import amplitude_phase
from trueturn.balance import parse_readings, solve
from trueturn.balance.influence import Correction
from trueturn.balance.iso21940 import TolerancePlanes, VerdictFlag
from trueturn.balance.solve import SolveReport
from trueturn.cli.common import json_in_units, print_json
from trueturn.errors import UserError
from trueturn.files import MAX_TEXT_BYTES, read_text_file
from trueturn.model.units import (
    IMPERIAL,
    METRIC,
    UnitChoice,
    length_to_mm,
    mass_from_g,
    mass_to_g,
    rotor_mass_to_kg,
    significant_text,
    unbalance_from_gmm,
)
from trueturn.yamltext import LineDict, LineList, load_yaml_text

CAUTION = ("Caution: before attaching, moving or removing any mass, switch the machine off, "
           "lock it out and wait until it has stopped (the tach must show standstill). Fasten "
           "every mass to hold its centrifugal force; follow the machine manufacturer's "
           "instructions, local codes and licensed practice.")


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "solve", help="compute correction masses from balancing runs",
        description="Compute where and how much mass to add from balancing runs in a READINGS "
                    "file (YAML or JSON; see host/trueturn/balance/README.md). Readings with "
                    "phase use influence coefficients; amplitudes only use the four-run method. "
                    "A file in imperial units (mass_oz, radius_in, axial_in, rotor_mass_lb, "
                    "... in place of mass_g, radius_mm, axial_mm, rotor_mass_kg) is answered "
                    "in oz, in and oz·in.")
    parser.add_argument("readings", metavar="READINGS", help="YAML or JSON file, '-' for stdin")
    parser.add_argument("--json", action="store_true", help="machine-readable output")
    parser.set_defaults(run=run)


def load_document(path: str) -> Any:
    """Read a YAML/JSON document keeping its lines; any problem becomes one line naming the
    file (``file:line: problem``)."""
    if path != "-":
        return load_yaml_text(read_text_file(path), path)  # regular file, size limit
    try:
        text = sys.stdin.read(MAX_TEXT_BYTES + 1)
    except UnicodeDecodeError:
        raise UserError("stdin:1: not text (YAML or JSON in UTF-8 expected)") from None
    if len(text) > MAX_TEXT_BYTES:
        raise UserError(f"stdin: more than {MAX_TEXT_BYTES // (1024 * 1024)} MB; not a "
                        "readings file")
    return load_yaml_text(text, "stdin" if path == "-" else path)


#: imperial field of a READINGS file -> (its metric field, the conversion to it)
IMPERIAL_FIELDS: dict[str, tuple[str, Any]] = {
    "mass_oz": ("mass_g", lambda v: mass_to_g(v, "oz")),
    "max_mass_oz": ("max_mass_g", lambda v: mass_to_g(v, "oz")),
    "radius_in": ("radius_mm", lambda v: length_to_mm(v, "in")),
    "axial_in": ("axial_mm", lambda v: length_to_mm(v, "in")),
    "cg_axial_in": ("cg_axial_mm", lambda v: length_to_mm(v, "in")),
    "plane_distance_in": ("plane_distance_mm", lambda v: length_to_mm(v, "in")),
    "cg_from_first_plane_in": ("cg_from_first_plane_mm", lambda v: length_to_mm(v, "in")),
    "rotor_mass_lb": ("rotor_mass_kg", lambda v: rotor_mass_to_kg(v, "lb")),
}


def metric_document(doc: Any, source: str) -> tuple[Any, bool]:
    """The READINGS document with every imperial field (``mass_oz``, ``radius_in``, ...)
    converted into its metric field (lines kept for the messages), and whether it had any.
    A number that is not one is left for the schema to refuse; a field given both ways is
    refused here, naming its line."""
    found = False

    def walk(node: Any) -> Any:
        nonlocal found
        if isinstance(node, LineList):
            out_list = LineList(walk(item) for item in node)
            out_list.line, out_list.item_lines = node.line, list(node.item_lines)
            return out_list
        if not isinstance(node, LineDict):
            return node
        out = LineDict()
        out.line = node.line
        for key, value in node.items():
            line = node.key_lines.get(key, node.line)
            if isinstance(key, str) and key in IMPERIAL_FIELDS:
                metric, convert = IMPERIAL_FIELDS[key]
                if metric in node:
                    raise UserError(f"{source}:{line}: {key}: give {metric} or {key}, not both")
                found = True
                ok = isinstance(value, (int, float)) and not isinstance(value, bool)
                key, value = metric, (convert(value) if ok else value)
            out[key] = walk(value)
            out.key_lines[key] = line
        return out

    return walk(doc), found


def _r(value: float | None, digits: int = 4) -> float | None:
    return None if value is None else round(float(value), digits)


def _correction_json(c: Correction) -> dict[str, Any]:
    out: dict[str, Any] = {"plane": c.plane, "mass_g": _r(c.mass_g), "angle_deg": _r(c.angle_deg, 2)}
    if c.mass_g_pm is not None:
        out["mass_g_pm"] = _r(c.mass_g_pm)
        out["angle_deg_pm"] = _r(c.angle_deg_pm, 2)
    return out


#: A predicted 1x below this fraction of the largest as-found 1x is rounding noise of the
#: least-squares solve (float64 resolves about 1e-16 of the inputs): it is shown as 0,
#: without a phase (an exact fit, as many unknowns as readings, predicts exactly 0).
NUMERICALLY_ZERO_FRACTION = 1e-9


def _negligible(value: complex, scale: float) -> bool:
    return abs(value) <= NUMERICALLY_ZERO_FRACTION * scale


def _scale(report: SolveReport) -> float:
    """The largest as-found 1x: what a predicted 1x is compared with."""
    return max((abs(v) for v in (report.solution.as_found or {}).values()), default=0.0)


def _phasor_json(value: complex, has_phase: bool, scale: float = 0.0) -> dict[str, Any]:
    if _negligible(value, scale):
        return {"amp": 0.0, "phase_deg": None}
    amp, phase = amplitude_phase(value)
    return {"amp": _r(amp, 6), "phase_deg": _r(phase, 2) if has_phase else None}


def report_json(report: SolveReport, has_phase: bool,
                shown: UnitChoice = METRIC) -> dict[str, Any]:
    """The stable JSON contract of `solve` (plus extra fields documented in the README)."""
    s = report.solution
    out: dict[str, Any] = {
        "method": s.method,
        "corrections": [_correction_json(c) for c in s.corrections],
        "predicted_residual": {k: _phasor_json(v, has_phase, _scale(report))
                               for k, v in s.predicted_residual.items()},
        "condition_number": _r(s.condition_number, 3),
        "warnings": list(s.warnings) + speed_warnings(report) + size_warnings(report, shown),
        "trial_masses": s.trial_masses,
        "on_rotor_now": [{"plane": m.plane, "mass_g": m.mass_g, "angle_deg": m.angle_deg}
                         for m in s.on_rotor_now],
        "corrections_keeping_current": [_correction_json(c) for c in s.corrections_keeping_current],
        "ambiguous": s.ambiguous,
        "inconsistent": s.inconsistent,
        "clipped": [{"run": label, "sensor": sensor} for label, sensor in s.clipped],
        "candidates": [[_correction_json(c) for c in cand] for cand in s.candidates],
    }
    if report.static_couple is not None:
        sc = report.static_couple
        out["static_couple"] = {"static_gmm": _r(sc.static_gmm), "static_angle_deg": _r(sc.static_angle_deg, 2),
                                "couple_gmm": _r(sc.couple_gmm), "couple_angle_deg": _r(sc.couple_angle_deg, 2)}
    if report.verdict is not None:
        out["tolerance"] = verdict_json(report)
        if VerdictFlag.SPEED_FROM_LAST_RUN in report.verdict.flags:
            out["warnings"].append(VERDICT_FLAG_TEXT[VerdictFlag.SPEED_FROM_LAST_RUN].format(
                speed_rpm=report.verdict.speed_rpm or 0.0))
    if s.fit_scatter is not None:
        out["fit_scatter"] = {k: _r(v, 6) for k, v in s.fit_scatter.items()}
    if report.correction_findings:
        out["large_corrections"] = [
            {"plane": f.plane, "mass_g": _r(f.mass_g), "share_of_rotor": _r(f.share_of_rotor, 6),
             "flag": f.flag.value} for f in report.correction_findings]
    if report.speed is not None:
        out["off_speed"] = speed_json(report)
    if s.influence is not None:
        out["influence"] = [{"sensor": c.sensor, "plane": c.plane, "amp_per_g": _r(c.amp_per_g, 8),
                             "phase_deg": _r(c.phase_deg, 3), "speed_rpm": c.speed_rpm}
                            for c in s.influence.as_saved()]
    return out


def speed_warnings(report: SolveReport) -> list[str]:
    """Runs at different speeds in words (the facts are in ``report.speed``)."""
    est = report.speed
    if est is None:
        return []
    lines = []
    for r in est.off_speed:
        low, high = sorted(100 * abs(e) for e in r.amplitude_error_range)
        way = "below" if r.deviation < 0 else "above"
        lines.append(f"run '{r.label}' at {r.speed_rpm:g} rpm is {100 * abs(r.deviation):.1f} % "
                     f"{way} its group's {r.reference_rpm:g} rpm: its 1x reads about "
                     f"{low:.1f}...{high:.1f} % {'low' if r.deviation < 0 else 'high'} "
                     "(1x ~ speed^2...speed^4)")
    if est.normalised_with_slopes:
        lines.append("readings carried to each group's reference speed with each pickup's "
                     "measured slope of amplitude and phase (speed_slopes)")
    elif est.normalised_with_exponent is not None:
        lines.append(f"readings normalised to each group's reference speed with 1x ~ "
                     f"speed^{est.normalised_with_exponent:g} (speed_exponent)")
    elif est.correction_change_fraction:
        worst = max(est.correction_change_fraction)
        lines.append(f"speed differences: the correction may be off by up to {100 * worst:.0f} % "
                     f"(vector), so it might cut the unbalance by only "
                     f"{100 * max(est.worst_cut_fraction, 0.0):.0f} %; repeat the off-speed "
                     "run(s) at the reference speed, or give speed_exponent (the local slope, "
                     "e.g. from a coast-down sweep)")
    return lines


def size_warnings(report: SolveReport, shown: UnitChoice = METRIC) -> list[str]:
    """Corrections large against the rotor's mass, loudly; clipped readings left out."""
    clipped = [f"run '{label}', pickup {sensor}: the reading clipped and was left out of the "
               "coefficients; reduce the pickup's gain" for label, sensor in report.solution.clipped]
    return clipped + [f"LARGE CORRECTION: plane {f.plane}: "
                      f"{mass_from_g(f.mass_g, shown.mass):.4g} {shown.mass} is "
                      f"{100 * f.share_of_rotor:.2g} % "
            "of the rotor's mass; check the runs before fitting it, and that the plane can hold "
            "it at speed" for f in report.correction_findings]


def speed_json(report: SolveReport) -> dict[str, Any] | None:
    est = report.speed
    if est is None:
        return None
    return {"runs": [{"run": r.index, "label": r.label, "speed_rpm": r.speed_rpm,
                      "reference_rpm": r.reference_rpm, "deviation": _r(r.deviation, 6),
                      "amplitude_error_range": [_r(e, 6) for e in r.amplitude_error_range]}
                     for r in est.off_speed],
            "correction_change_g": [_r(x) for x in est.correction_change_g],
            "correction_change_fraction": [_r(x) for x in est.correction_change_fraction],
            "worst_cut_fraction": _r(est.worst_cut_fraction),
            "normalised_with_exponent": est.normalised_with_exponent,
            "normalised_with_slopes": est.normalised_with_slopes}


def verdict_json(report: SolveReport) -> dict[str, Any]:
    """The ``tolerance`` object: values per tolerance plane (the bearings when known)."""
    v = report.verdict
    assert v is not None
    out: dict[str, Any] = {
        "U_per_gmm": _r(report.u_per_gmm), "speed_rpm": v.speed_rpm,
        "tolerance_planes": v.tolerance_planes.value, "labels": list(v.labels),
        "per_plane_gmm": [_r(x) for x in v.permissible_gmm],
        "residual_now_gmm": [_r(x) for x in v.residual_gmm], "pass": v.passed,
        "residual_upper_95_gmm": [_r(x) for x in v.residual_upper_gmm] or None,
        "flags": [f.value for f in v.flags]}
    if v.tolerance_planes is TolerancePlanes.BEARINGS:
        out["per_bearing_gmm"] = out["residual_now_gmm"]
        out["per_bearing_angle_deg"] = [None if a is None else _r(a, 2) for a in v.residual_angle_deg]
        out["per_bearing_permissible_gmm"] = out["per_plane_gmm"]
        out["plane_arrangement"] = v.arrangement.value if v.arrangement else None
    s = report.solution
    if s.residual_now_gmm is not None:
        out["residual_in_correction_planes_gmm"] = [_r(x) for x in s.residual_now_gmm]
    return out


#: the verdict's flags in words (the one place they are put into words for the CLI)
VERDICT_FLAG_TEXT = {
    VerdictFlag.NOT_AT_BEARINGS: "judged in the correction planes: give `bearings` and each "
                                 "plane's `axial_mm` to judge at the bearings (ISO 21940-11)",
    VerdictFlag.WORST_CASE_PHASING: "residual angles unknown: bearing loads are the worst case",
    VerdictFlag.CG_OUTSIDE_BEARINGS: "centre of mass outside the bearings: shares limited to "
                                     "0.3/0.7 of U_per; check the standard's rules for such rotors",
    VerdictFlag.CG_ASSUMED_MIDWAY: "centre of mass not given (tolerance.cg_axial_mm): taken "
                                   "midway between the bearings",
    VerdictFlag.SPEED_FROM_LAST_RUN: "no maximum service speed given (tolerance.speed_rpm): "
                                     "judged at the last run's speed, {speed_rpm:g} rpm; "
                                     "give the machine's maximum service speed",
    VerdictFlag.AMBIGUOUS: "the answer is ambiguous: no pass can be given",
    VerdictFlag.INCONSISTENT: "the amplitudes do not fit one answer: no pass can be given",
    VerdictFlag.CLIPPED: "the last run has a clipped reading (it reads low): no pass can be "
                         "given; repeat it with the pickup's gain reduced",
    VerdictFlag.NOT_PROVEN: "within on the estimate, but the residual's 95 % upper bound "
                            "reaches past the allowance: not proven; a longer run (more "
                            "revolutions) or a trim gives the margin",
}


def _unbalance(gmm: float | None, shown: UnitChoice) -> str:
    """An unbalance number (4 significant figures) in the units answered in."""
    if gmm is None:
        return "?"
    if shown == METRIC:
        return f"{gmm:.4g}"
    return significant_text(unbalance_from_gmm(gmm, shown.mass, shown.length), 4)


def verdict_text(report: SolveReport, shown: UnitChoice = METRIC) -> list[str]:
    """The verdict in words: one line per tolerance plane, then the flags."""
    v = report.verdict
    assert v is not None
    where = "at the bearings" if v.tolerance_planes is TolerancePlanes.BEARINGS else \
        "in the correction planes"
    speed = f" at {v.speed_rpm:g} rpm" if v.speed_rpm else ""
    lines = [f"ISO 21940-11 residual of the last run, {where} (U_per "
             f"{_unbalance(report.u_per_gmm, shown)} {shown.unbalance}{speed}):"]
    labels = v.labels or tuple(f"plane {i + 1}" for i in range(len(v.residual_gmm)))
    uppers = v.residual_upper_gmm or (None,) * len(v.residual_gmm)
    for name, r, p, u in zip(labels, v.residual_gmm, v.permissible_gmm, uppers, strict=True):
        bound = f" (95 % upper bound {_unbalance(u, shown)})" if u is not None else ""
        lines.append(f"  {name:<14} {_unbalance(r, shown)} of {_unbalance(p, shown)} "
                     f"{shown.unbalance}{bound}")
    if v.arrangement is not None:
        lines.append(f"  correction planes {v.arrangement.value} of the bearings")
    lines.append("  -> " + ("PASS" if v.passed else "not yet within tolerance"))
    lines += [f"  note: {VERDICT_FLAG_TEXT[f].format(speed_rpm=v.speed_rpm or 0.0)}"
              for f in v.flags]
    return lines


def _line(c: Correction, shown: UnitChoice = METRIC) -> str:
    digits = 3 if shown.mass == "g" else 4  # 0.001 g, 0.0001 oz (0.003 g)
    mass = mass_from_g(c.mass_g, shown.mass)
    text = f"  {c.plane:<14} {mass:8.{digits}f} {shown.mass} at {c.angle_deg:6.1f}°"
    if c.mass_g_pm is not None:
        text += (f"   (± {mass_from_g(c.mass_g_pm, shown.mass):.3g} {shown.mass}, "
                 f"± {c.angle_deg_pm:.0f}°, 95 %)")
    return text


def report_text(report: SolveReport, has_phase: bool, shown: UnitChoice = METRIC) -> str:
    s = report.solution
    lines = [f"method: {s.method}",
             "",
             "Add to the as-found rotor (every trial mass removed):"]
    lines += [_line(c, shown) for c in s.corrections]
    if s.on_rotor_now:
        now = ", ".join(f"{mass_from_g(m.mass_g, shown.mass):g} {shown.mass} at "
                        f"{m.angle_deg:g}° in {m.plane}" for m in s.on_rotor_now)
        lines += ["", f"Or, leaving the trial masses of the last run on ({now}), add:"]
        lines += [_line(c, shown) for c in s.corrections_keeping_current]
    else:
        lines += ["", "No trial mass was on the rotor in the last run: add the masses above."]
    lines.append(f"(trial masses between runs: {s.trial_masses})")
    if s.candidates:
        lines += ["", "Other answers that fit equally well:"]
        for cand in s.candidates:
            lines += [_line(c, shown) for c in cand]
    if s.fit_scatter is not None:
        lines += ["", "Fit scatter of the amplitudes (RMS misfit, the floor of what can be "
                      "predicted; not a prediction):"]
        lines += [f"  {key:<14} {value:10.4g}" for key, value in s.fit_scatter.items()]
    else:
        lines += ["", "Predicted 1x after the correction:"]
        for key, value in s.predicted_residual.items():
            if _negligible(value, _scale(report)):
                lines.append(f"  {key:<14} {0:10g}   (numerically zero)")
                continue
            amp, phase = amplitude_phase(value)
            lines.append(f"  {key:<14} {amp:10.4g}" + (f" at {phase:6.1f}°" if has_phase else ""))
    if s.condition_number is not None:
        lines.append(f"condition number: {s.condition_number:.3g}")
    if report.static_couple is not None:
        sc = report.static_couple
        u = shown.unbalance
        lines.append(f"static part: {_unbalance(sc.static_gmm, shown)} {u} at "
                     f"{sc.static_angle_deg:.1f}°; couple: {_unbalance(sc.couple_gmm, shown)} "
                     f"{u} per plane at {sc.couple_angle_deg:.1f}° / "
                     f"{(sc.couple_angle_deg + 180) % 360:.1f}°")
    if report.verdict is not None:
        lines += verdict_text(report, shown)
    for w in [*s.warnings, *speed_warnings(report), *size_warnings(report, shown)]:
        lines.append(f"warning: {w}")
    lines += ["", CAUTION]
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    name = "stdin" if args.readings == "-" else args.readings
    doc, imperial = metric_document(load_document(args.readings), name)
    shown = IMPERIAL if imperial else METRIC
    # the engine's warnings and refusals name masses in the file's unit
    inp = dataclasses.replace(parse_readings(doc, name), mass_unit=shown.mass)
    try:
        report = solve(inp)
    except UserError as exc:
        raise UserError(f"{name}: {exc}") from None
    if args.json:
        data = report_json(report, inp.has_phase, shown)
        print_json(json_in_units(data, shown) if imperial else data)
    else:
        print(report_text(report, inp.has_phase, shown))
    return 0
