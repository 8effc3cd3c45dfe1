"""Noise records for complaints: long recordings → levels, events, diary, link to the wall.

The names below are imported when first used, so ``fieldtl.noise.command`` (which every ``fieldtl``
command's option parser reads) does not load the analysis and scipy.signal with it.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from fieldtl.noise.record import NoiseEvent, NoiseRecord, analyse_record
    from fieldtl.noise.settings import DEFAULT_PERIODS, PeriodSpec, RecordSettings

_HOMES = {"NoiseEvent": "fieldtl.noise.record", "NoiseRecord": "fieldtl.noise.record",
          "analyse_record": "fieldtl.noise.record", "DEFAULT_PERIODS": "fieldtl.noise.settings",
          "PeriodSpec": "fieldtl.noise.settings", "RecordSettings": "fieldtl.noise.settings"}

__all__ = ["DEFAULT_PERIODS", "NoiseEvent", "NoiseRecord", "PeriodSpec", "RecordSettings", "analyse_record"]


def __getattr__(name: str) -> Any:
    if name in _HOMES:
        return getattr(importlib.import_module(_HOMES[name]), name)
    raise AttributeError(f"module 'fieldtl.noise' has no attribute {name!r}")
