"""The access code of a shared app: making one, checking a chosen one, comparing, limiting guesses.

No Streamlit here (the ``fieldtl app`` command uses it before the server starts); the gate that
draws the code form is :mod:`fieldtl.ui.gate`.

A made code is 12 characters from a 31-symbol alphabet without look-alikes (no 0/o, 1/l/i),
shown in three groups of four: 12 x log2(31) = 59.4 bits. Typed codes are compared after removing
spaces and dashes and folding case, so "K7M2 Q9TX 4HVW" opens a server whose code is k7m2-q9tx-4hvw.
"""

from __future__ import annotations

import hashlib
import hmac
import math
import secrets
import threading
import time
import unicodedata
from collections.abc import Callable, Iterable
from dataclasses import dataclass

from fieldtl.errors import InputError

ENV_VAR = "FIELDTL_ACCESS_CODE"
ALPHABET = "23456789abcdefghjkmnpqrstuvwxyz"     # 31 symbols: no 0, 1, i, l, o
GROUPS, GROUP_LENGTH = 3, 4
MIN_BITS = 40.0              # the least guessing work a chosen code must stand for
MIN_DISTINCT = 5             # a chosen code of one or two repeated characters is refused
MAX_CODE_CHARS = 64          # longer input is not a code (and is never compared)
_SEPARATORS = frozenset("-\u2010\u2011\u2012\u2013\u2014_.")
EXAMPLE = "k7m2-q9tx-4hvw"


def new_code() -> str:
    """A fresh random code, grouped for reading aloud and typing on a phone."""
    characters = "".join(secrets.choice(ALPHABET) for _ in range(GROUPS * GROUP_LENGTH))
    return "-".join(characters[i:i + GROUP_LENGTH] for i in range(0, len(characters), GROUP_LENGTH))


def normalise(text: str) -> str:
    """The code as compared: Unicode-compatibility folded, without spaces and dashes, in lower case."""
    folded = unicodedata.normalize("NFKC", text)
    return "".join(c for c in folded if not (c.isspace() or c in _SEPARATORS)).casefold()


def matches(entered: str, expected: str) -> bool:
    """True when the typed text is the code. Any text is safe here: non-ASCII, lone surrogates, huge.

    Both sides are hashed before a constant-time comparison, so neither the content nor the
    length of the expected code shows in the time taken.
    """
    wanted = normalise(expected)
    if not wanted or len(entered) > 4 * MAX_CODE_CHARS:
        return False
    typed = normalise(entered).encode("utf-8", "surrogatepass")
    return hmac.compare_digest(hashlib.sha256(typed).digest(),
                               hashlib.sha256(wanted.encode("utf-8", "surrogatepass")).digest())


def estimated_bits(code: str) -> float:
    """Guessing work of a chosen code, counted generously: length x log2(size of the classes used).

    Classes: digits (10), letters a-z after case folding (26), anything else (33, printable ASCII
    punctuation and beyond). This overrates codes made of words; the distinct-character rule and
    the guess limiter cover the worst of those.
    """
    text = normalise(code)
    pool = ((10 if any(c.isdigit() and c.isascii() for c in text) else 0)
            + (26 if any("a" <= c <= "z" for c in text) else 0)
            + (33 if any(not (c.isascii() and c.isalnum()) for c in text) else 0))
    return len(text) * math.log2(pool) if pool else 0.0


def check_chosen_code(code: str, *, source: str = "access code") -> str:
    """The chosen code as given, or InputError (one line, never echoing the code) when it is too weak."""
    text = normalise(code)
    if len(code) > MAX_CODE_CHARS:
        raise InputError(f"{source}: longer than {MAX_CODE_CHARS} characters")
    if any(unicodedata.category(c).startswith("C") for c in text):
        raise InputError(f"{source}: control characters are not allowed")
    bits = estimated_bits(code)
    if bits < MIN_BITS or len(set(text)) < MIN_DISTINCT:
        raise InputError(f"{source}: too easy to guess ({len(text)} characters, {len(set(text))} different, "
                         f"about {math.floor(bits)} bits); use at least {MIN_BITS:.0f} bits and {MIN_DISTINCT} "
                         f"different characters, e.g. {EXAMPLE}")
    return code


# --- wrong guesses -------------------------------------------------------------------------------------

FREE_FAILURES = 2            # typing slips: no wait after the first two wrong codes
FIRST_DELAY_S = 5.0          # then 5, 10, 20, 40, 80 s before the next try is looked at
MAX_FAILURES = 8             # the 8th wrong code locks the client out
LOCKOUT_S = 15 * 60.0
FORGET_S = 60 * 60.0         # failures are forgotten an hour after the last one
MAX_TRACKED = 10_000         # clients remembered at once (the oldest are dropped first)


@dataclass(slots=True)
class _Record:
    failures: int
    last_failure_s: float


def delay_after(failures: int) -> float:
    """Seconds before the next try is looked at, after ``failures`` wrong codes in a row."""
    if failures >= MAX_FAILURES:
        return LOCKOUT_S
    if failures <= FREE_FAILURES:
        return 0.0
    return FIRST_DELAY_S * 2.0 ** (failures - FREE_FAILURES - 1)


class GuessLimiter:
    """Wrong codes counted per key (a session, a client address), held in the server's memory.

    ``clock`` returns seconds (monotonic); tests pass their own. A key is refused while any of the
    keys of a try still waits; a failure counts against every key of the try.
    """

    def __init__(self, *, clock: Callable[[], float] = time.monotonic) -> None:
        self._clock = clock
        self._lock = threading.Lock()
        self._records: dict[str, _Record] = {}

    def wait_s(self, keys: Iterable[str]) -> float:
        """Seconds until a try from these keys is looked at (0.0: now)."""
        keys = tuple(keys)
        now = self._clock()
        with self._lock:
            waits = [record.last_failure_s + delay_after(record.failures) - now
                     for key in keys if (record := self._records.get(key)) is not None]
        return max([0.0, *waits])

    def failed(self, keys: Iterable[str]) -> float:
        """Count a wrong code against every key; the wait it brings, in seconds."""
        keys = tuple(keys)
        now = self._clock()
        with self._lock:
            self._forget_old(now)
            for key in keys:
                record = self._records.pop(key, None)      # re-inserted below, so the dict runs oldest first
                if record is None:
                    record = _Record(0, now)
                    while len(self._records) >= MAX_TRACKED:
                        del self._records[next(iter(self._records))]
                self._records[key] = _Record(record.failures + 1, now)
        return self.wait_s(keys)

    def succeeded(self, keys: Iterable[str]) -> None:
        with self._lock:
            for key in keys:
                self._records.pop(key, None)

    def _forget_old(self, now: float) -> None:
        stale = [key for key, record in self._records.items() if now - record.last_failure_s >= FORGET_S]
        for key in stale:
            del self._records[key]


LIMITER = GuessLimiter()     # one per server process, shared by every session


def describe_wait(seconds: float) -> str:
    if seconds >= 90:
        return f"{math.ceil(seconds / 60)} minutes"
    return f"{math.ceil(seconds)} s"
