"""Noise records for complaints: long recordings → levels, events, diary, link to the wall."""

from fieldtl.noise.record import NoiseEvent, NoiseRecord, analyse_record
from fieldtl.noise.settings import DEFAULT_PERIODS, PeriodSpec, RecordSettings

__all__ = ["DEFAULT_PERIODS", "NoiseEvent", "NoiseRecord", "PeriodSpec", "RecordSettings", "analyse_record"]
