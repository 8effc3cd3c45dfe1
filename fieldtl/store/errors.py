"""The store's refusals that a user can act on (both are StoreErrors: one clear line)."""

from __future__ import annotations

from fieldtl.errors import StoreError


class PermissionDenied(StoreError):
    """The account has no role on the project that allows this (team server)."""


class StaleEditError(StoreError):
    """The record changed since the caller read it: the edit is refused, nothing is overwritten."""
