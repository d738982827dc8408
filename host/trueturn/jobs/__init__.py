"""Machine profiles, job records, the workspace store, reports and the printable angle ring."""

from trueturn.jobs.profiles import MachineProfile, Pickup, Plane, PlaneLayout, TachSetup, Units
from trueturn.jobs.records import (
    CoefficientSet,
    Confirmation,
    CorrectionEntry,
    Event,
    InfluenceEntry,
    JobRecord,
    MassChange,
    PendingStep,
    PlaneVerdict,
    RunEntry,
    SplitPart,
    VerdictEntry,
)
from trueturn.jobs.schema import SchemaError
from trueturn.jobs.store import SCHEMA_VERSION, Workspace

__all__ = [
    "CoefficientSet", "Confirmation", "CorrectionEntry", "Event", "InfluenceEntry", "JobRecord",
    "MachineProfile", "MassChange", "PendingStep", "Pickup", "Plane", "PlaneLayout",
    "PlaneVerdict", "RunEntry", "SCHEMA_VERSION", "SchemaError", "SplitPart",
    "TachSetup", "Units", "VerdictEntry", "Workspace",
]
