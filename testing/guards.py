"""The guard triggers testing's migrations create (0009), per database vendor: a shear reading's
stage exists, a stage's readings go with it, a stage's id is fixed. Checked by ``verify_integrity``."""

from __future__ import annotations

from labsite.dbguards import GuardTriggers

_READING_STAGE = {
    "testing_shearreading": [
        "testing_shear_reading_stage_insert",
        "testing_shear_reading_stage_update",
    ],
    "testing_shearstage": [
        "testing_shear_stage_readings_delete",
        "testing_shear_stage_id_update",
    ],
}

GUARD_TRIGGERS: GuardTriggers = {"sqlite": _READING_STAGE, "postgresql": _READING_STAGE}
