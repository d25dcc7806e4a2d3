"""Lab records, one module per aggregate; explicit re-exports keep imports stable."""

from testing.models.audit import ReadingsChange, ReadingsSource
from testing.models.clients import Borehole, Organisation, Project
from testing.models.direct_shear import (
    AreaModel,
    BoxShape,
    ConsolidationReading,
    DirectShearTest,
    FailureChoice,
    ForceUnit,
    MethodProfile,
    NormalLoading,
    ShearReadingBlock,
    ShearStage,
    ShearType,
    TestCondition,
)
from testing.models.equipment import (
    Apparatus,
    CalibrationModel,
    CalibrationRecord,
    DisplacementGauge,
    ForceDevice,
    ForceDeviceKind,
)
from testing.models.imports import (
    ImportedShearTest,
    ImportLayout,
    ImportState,
    ReadingImport,
)
from testing.models.people import LabProfile, Role
from testing.models.results import (
    ComputationRun,
    EnvelopeResult,
    EnvelopeType,
    OutboxMessage,
    RunKind,
    RunState,
    StageExclusion,
    StageResult,
)
from testing.models.samples import Sample, SampleEvent, SampleStatus, SampleType
from testing.models.specimens import Preparation, Specimen, SpecimenShape

__all__ = [
    "Apparatus",
    "AreaModel",
    "Borehole",
    "BoxShape",
    "CalibrationModel",
    "CalibrationRecord",
    "ComputationRun",
    "ConsolidationReading",
    "DirectShearTest",
    "DisplacementGauge",
    "EnvelopeResult",
    "EnvelopeType",
    "FailureChoice",
    "ForceDevice",
    "ForceDeviceKind",
    "ForceUnit",
    "ImportLayout",
    "ImportState",
    "ImportedShearTest",
    "LabProfile",
    "MethodProfile",
    "NormalLoading",
    "Organisation",
    "OutboxMessage",
    "Preparation",
    "Project",
    "ReadingImport",
    "ReadingsChange",
    "ReadingsSource",
    "Role",
    "RunKind",
    "RunState",
    "Sample",
    "SampleEvent",
    "SampleStatus",
    "SampleType",
    "ShearReadingBlock",
    "ShearStage",
    "ShearType",
    "Specimen",
    "SpecimenShape",
    "StageExclusion",
    "StageResult",
    "TestCondition",
]
