"""The registry's data model (see the brief's vocabulary)."""

from registry.models.audit import AuditEvent, AuditTrailError
from registry.models.documents import Document, DocumentKind, DocumentState
from registry.models.fieldwork import (
    AntennaHeightKind,
    Attachment,
    AttachmentKind,
    Condition,
    Occupation,
    OccupationMethod,
    Visit,
)
from registry.models.jobs import Job, JobStatus, RtkCombination, RtkHorizontalMeaning
from registry.models.marks import (
    CODE_VALIDATOR,
    POSITION_FROZEN_FIELDS,
    FrozenPositionError,
    HeightMethod,
    HeightRecord,
    Mark,
    MarkStatus,
    MonumentType,
    Position,
    PositionState,
    SkyView,
    Stability,
)

__all__ = [
    "CODE_VALIDATOR",
    "POSITION_FROZEN_FIELDS",
    "AntennaHeightKind",
    "Attachment",
    "AttachmentKind",
    "AuditEvent",
    "AuditTrailError",
    "Condition",
    "Document",
    "DocumentKind",
    "DocumentState",
    "FrozenPositionError",
    "HeightMethod",
    "HeightRecord",
    "Job",
    "JobStatus",
    "Mark",
    "MarkStatus",
    "MonumentType",
    "Occupation",
    "OccupationMethod",
    "Position",
    "PositionState",
    "RtkCombination",
    "RtkHorizontalMeaning",
    "SkyView",
    "Stability",
    "Visit",
]
