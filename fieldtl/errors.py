"""Exceptions for bad input.

Measurement-quality problems are never exceptions: they are :class:`fieldtl.findings.Finding`
values. Exceptions here mean the input cannot be used at all; every message is one line that
names the file (or value) and says what is wrong, so the CLI and UI can show it verbatim.
"""

from __future__ import annotations


class FieldTLError(Exception):
    """Base class of every error fieldtl raises on purpose."""


class InputError(FieldTLError, ValueError):
    """A file or value cannot be used: missing, unreadable, wrong shape, out of range."""


class CalibrationError(InputError):
    """A calibrator recording cannot give a trustworthy calibration."""


class StoreError(FieldTLError):
    """The project store cannot be opened, migrated or written."""
