"""The store's refusals that a user can act on (both are StoreErrors: one clear line)."""

from __future__ import annotations

from fieldtl.errors import StoreError


class PermissionDenied(StoreError):
    """The account has no role on the project that allows this (team server)."""


class StaleEditError(StoreError):
    """The record changed since the caller read it: the edit is refused, nothing is overwritten."""


def refuse_stale(where: str, current_updated_at: str, expected_updated_at: str | None) -> None:
    """The optimistic check of a settings edit: refuse it when the record changed after the editor read
    it (``expected_updated_at`` is the updated_at the editor saw; None: no check)."""
    if expected_updated_at is not None and current_updated_at != expected_updated_at:
        raise StaleEditError(f"{where}: changed by someone else at {current_updated_at[:19]} UTC after "
                             "you opened it; reload the test and make your change again")
