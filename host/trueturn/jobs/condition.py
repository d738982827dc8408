"""A run's machine condition as a job keeps it: overall severity and the unbalance judgement.

The DSP layer judges (:mod:`trueturn.dsp.severity`, :mod:`trueturn.dsp.unbalance`) and
returns findings; a job file keeps them as plain entries (:class:`SeverityEntry`,
:class:`UnbalanceEntry` of :mod:`trueturn.jobs.records`), and the report turns them back
into findings so :func:`trueturn.dsp.findings.describe` stays the one place they become
words.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import cast

from trueturn.angles import angle_difference_deg
from trueturn.dsp.findings import Code, Finding
from trueturn.dsp.severity import Severity
from trueturn.dsp.unbalance import NONSYNC_RATIO_MAX, ONE_X_SHARE_MIN, TWO_X_RATIO_MAX
from trueturn.jobs.records import (
    EvidenceCode,
    EvidenceEntry,
    SeverityEntry,
    UnbalanceEntry,
    VerdictCode,
)

_LIMITS = {Code.ONE_X_SHARE: ("share", ONE_X_SHARE_MIN), Code.TWO_X_RATIO: ("ratio", TWO_X_RATIO_MAX),
           Code.NONSYNC_PEAK: ("ratio", NONSYNC_RATIO_MAX)}
#: the repeat rule's limit depends on the readings' 95 % circles: kept with the entry
_REPEAT = Code.PHASE_REPEATABLE


def severity_entries(severity: Sequence[Severity]) -> list[SeverityEntry]:
    """Each pickup's severity as a job keeps it."""
    return [SeverityEntry(s.pickup, s.velocity_rms_mm_s, s.zone.value if s.zone else None,
                          s.refused.value if s.refused else None,
                          s.band_hz if s.velocity_rms_mm_s is not None else None)
            for s in severity]


def unbalance_entry(unbalance: Sequence[Finding]) -> UnbalanceEntry | None:
    """The verdict (first finding) and its evidence as a job keeps them; None without one."""
    if not unbalance:
        return None
    evidence = []
    for f in unbalance[1:]:
        key = "difference" if f.code is _REPEAT else _LIMITS.get(f.code, ("", 0.0))[0]
        code = cast(EvidenceCode, f.code.value)
        phases = f.details.get("phases_deg")
        evidence.append(EvidenceEntry(code, f.pickup or "", bool(f.details.get("ok")),
                                      f.details.get(key), f.details.get("hz"),
                                      f.details.get("order"),
                                      (float(phases[0]), float(phases[1])) if phases else None,
                                      f.details.get("amplitude_ratio"),
                                      f.details.get("limit") if f.code is _REPEAT else None))
    return UnbalanceEntry(cast(VerdictCode, unbalance[0].code.value), evidence)


def severity_finding(entry: SeverityEntry) -> Finding:
    """A kept severity as a finding, for :func:`trueturn.dsp.findings.describe`."""
    return Finding(Code.SEVERITY, entry.sensor, details={
        "velocity_rms_mm_s": entry.velocity_rms_mm_s, "zone": entry.zone,
        "band_hz": list(entry.band_hz) if entry.band_hz else None, "refused": entry.refused})


def evidence_finding(entry: EvidenceEntry) -> Finding:
    """A kept piece of evidence as a finding, for :func:`trueturn.dsp.findings.describe`."""
    code = Code(entry.code)
    details: dict[str, object] = {"ok": entry.ok}
    if code in _LIMITS:
        key, limit = _LIMITS[code]
        details.update({key: entry.value, "limit": limit})
    if code is Code.NONSYNC_PEAK:
        details.update({"hz": entry.hz or 0.0, "order": entry.order})
    if code is _REPEAT:
        phases = list(entry.phases_deg) if entry.phases_deg else None
        change = (angle_difference_deg(phases[1], phases[0]) if phases else None)
        details.update({"difference": entry.value, "limit": entry.limit, "phases_deg": phases,
                        "phase_change_deg": change, "amplitude_ratio": entry.amplitude_ratio})
    return Finding(code, entry.sensor, details=details)


def verdict_finding(entry: UnbalanceEntry) -> Finding:
    """A kept verdict as a finding, for :func:`trueturn.dsp.findings.describe`."""
    because = sorted({e.code for e in entry.evidence if not e.ok})
    return Finding(Code(entry.verdict), details={"because": because} if because else {})
