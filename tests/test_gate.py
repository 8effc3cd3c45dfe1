"""The access code without Streamlit: making, comparing, judging chosen codes, limiting wrong guesses.

Expected numbers are the design written down here (and in the issue), not read from the module:
a made code has at least 40 bits; wrong guesses: two free, then 5 s doubling, the 8th locks out
for 15 minutes; failures are forgotten an hour after the last one.
"""

import math
import re

import pytest

from fieldtl.errors import InputError
from fieldtl.ui import access
from fieldtl.ui.access import GuessLimiter, check_chosen_code, matches, new_code


class FakeClock:
    def __init__(self) -> None:
        self.now_s = 1000.0

    def __call__(self) -> float:
        return self.now_s


# --- made codes --------------------------------------------------------------------------------------

def test_a_made_code_is_three_groups_of_four_from_an_alphabet_without_look_alikes():
    codes = {new_code() for _ in range(300)}
    assert len(codes) == 300                               # 59 bits: a repeat in 300 draws would be a fault
    for code in codes:
        assert re.fullmatch(r"[2-9a-hjkmnp-z]{4}-[2-9a-hjkmnp-z]{4}-[2-9a-hjkmnp-z]{4}", code), code
        assert not set(code) & set("01ilo")
    # Entropy of 12 independent symbols from 31: 12 * log2(31) = 59.45 bits (analytic), over 40.
    assert 12 * math.log2(31) == pytest.approx(59.45, abs=0.01) and len(set(access.ALPHABET)) == 31


def test_a_made_code_passes_the_check_of_chosen_codes():
    for _ in range(50):
        code = new_code()
        if not code.replace("-", "").isdigit():            # all digits: probability (8/31)^12, about 1e-7
            assert check_chosen_code(code) == code


# --- comparing ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("typed", ["k7m2-q9tx-4hvw", "K7M2Q9TX4HVW", " k7m2 q9tx 4hvw ", "k7m2–q9tx–4hvw",
                                   "ｋ７ｍ２－ｑ９ｔｘ－４ｈｖｗ"])      # en dashes; full-width forms (NFKC)
def test_the_code_opens_with_or_without_dashes_spaces_and_capitals(typed):
    assert matches(typed, "k7m2-q9tx-4hvw")


@pytest.mark.parametrize("typed", ["k7m2-q9tx-4hvx", "k7m2-q9tx-4hv", "k7m2-q9tx-4hvww", "", "   ",
                                   "ключ-κλειδί-鍵", "k7m2-q9tx-4hvẃ", "\ud800\udfff", "\x00" * 20, "😀" * 64,
                                   "k" * 1_000_000])
def test_any_other_text_is_not_the_code_and_never_raises(typed):
    assert matches(typed, "k7m2-q9tx-4hvw") is False


def test_an_empty_expected_code_opens_nothing():
    assert not matches("", "") and not matches("-", " - ")


# --- chosen codes: edges of the 40-bit estimate and the 5-distinct rule --------------------------------------

@pytest.mark.parametrize("code, ok", [
    ("123456789012", False),     # 12 digits: 12 * log2(10) = 39.86 bits, just under 40
    ("1234567890123", True),     # 13 digits: 43.19 bits
    ("abcdefgh", False),         # 8 letters: 8 * log2(26) = 37.60 bits
    ("abcdefghj", True),         # 9 letters: 42.30 bits
    ("abc1234", False),          # 7 letters and digits: 7 * log2(36) = 36.19 bits
    ("ab-cd 12-34", True),       # 8 of them (separators not counted): 41.36 bits
    ("abab1212abab", False),     # 4 different characters: refused whatever its length
    ("abcab1212abab", True),     # 5 different, 13 characters
    ("K7M2-Q9TX-4HVW", True),
])
def test_a_chosen_code_needs_40_bits_and_5_different_characters(code, ok):
    if ok:
        assert check_chosen_code(code) == code
    else:
        with pytest.raises(InputError) as raised:
            check_chosen_code(code, source="--access-code")
        message = str(raised.value)
        assert message.startswith("--access-code: too easy to guess") and "\n" not in message
        assert code not in message                         # a secret is never echoed


def test_a_chosen_code_is_at_most_64_characters_and_has_no_control_characters():
    long_code = "k7m2q9tx4hvw" * 5 + "abcd"
    assert len(long_code) == 64 and check_chosen_code(long_code)
    with pytest.raises(InputError, match="longer than 64 characters"):
        check_chosen_code(long_code + "e")
    with pytest.raises(InputError, match="control characters"):
        check_chosen_code("k7m2q9tx4hvw\x07")


# --- wrong guesses -------------------------------------------------------------------------------------------

def _fail(limiter, clock, times, keys=("session:a",)):
    """Fail ``times`` times, each as soon as the limiter looks at a try again."""
    for _ in range(times):
        clock.now_s += limiter.wait_s(keys)
        limiter.failed(keys)


def test_two_wrong_codes_bring_no_wait_and_the_third_a_five_second_wait():
    clock = FakeClock()
    limiter = GuessLimiter(clock=clock)
    _fail(limiter, clock, 2)
    assert limiter.wait_s(["session:a"]) == 0.0
    assert limiter.failed(["session:a"]) == 5.0
    clock.now_s += 4.9
    assert limiter.wait_s(["session:a"]) == pytest.approx(0.1)
    clock.now_s += 0.1
    assert limiter.wait_s(["session:a"]) == 0.0


def test_waits_double_from_five_seconds():
    clock = FakeClock()
    limiter = GuessLimiter(clock=clock)
    _fail(limiter, clock, 2)
    waits = []
    for _ in range(5):
        waits.append(limiter.failed(["session:a"]))
        clock.now_s += waits[-1]
    assert waits == [5.0, 10.0, 20.0, 40.0, 80.0]


def test_seven_wrong_codes_do_not_lock_out_and_the_eighth_locks_for_fifteen_minutes():
    clock = FakeClock()
    limiter = GuessLimiter(clock=clock)
    _fail(limiter, clock, 7)                              # N - 1
    assert limiter.wait_s(["session:a"]) == 80.0          # a wait, not the lockout
    clock.now_s += 80.0
    assert limiter.wait_s(["session:a"]) == 0.0
    limiter.failed(["session:a"])                         # N
    clock.now_s += 15 * 60 - 0.5
    assert limiter.wait_s(["session:a"]) == pytest.approx(0.5)
    clock.now_s += 0.5
    assert limiter.wait_s(["session:a"]) == 0.0
    assert limiter.failed(["session:a"]) == 15 * 60       # still counted: the next wrong code locks again


def test_a_new_session_from_the_same_address_still_waits_another_address_does_not():
    clock = FakeClock()
    limiter = GuessLimiter(clock=clock)
    _fail(limiter, clock, 8, keys=("session:a", "address:192.0.2.7"))
    assert limiter.wait_s(["session:b", "address:192.0.2.7"]) == 15 * 60
    assert limiter.wait_s(["session:c", "address:192.0.2.8"]) == 0.0


def test_the_right_code_clears_the_session_only_and_an_hour_clears_everything():
    clock = FakeClock()
    limiter = GuessLimiter(clock=clock)
    _fail(limiter, clock, 3, keys=("session:a", "address:192.0.2.7"))
    limiter.succeeded(["session:a"])
    assert limiter.wait_s(["session:a"]) == 0.0
    assert limiter.wait_s(["address:192.0.2.7"]) == 5.0
    clock.now_s += 59 * 60 + 59
    limiter.failed(["session:z"])                         # anyone's failure tidies up; 1 s short of the hour
    assert limiter.failed(["address:192.0.2.7"]) == 10.0  # 4th failure: remembered
    clock.now_s += 60 * 60
    limiter.failed(["session:z"])
    assert limiter.failed(["address:192.0.2.7"]) == 0.0   # forgotten: counted as the first again


def test_the_limiter_remembers_a_bounded_number_of_clients(monkeypatch):
    monkeypatch.setattr(access, "MAX_TRACKED", 3)
    clock = FakeClock()
    limiter = GuessLimiter(clock=clock)
    for name in "abcd":
        _fail(limiter, clock, 8, keys=(f"session:{name}",))
    assert limiter.wait_s(["session:a"]) == 0.0           # the oldest was dropped
    assert limiter.wait_s(["session:d"]) == 15 * 60


@pytest.mark.parametrize("seconds, text", [(5.0, "5 s"), (4.2, "5 s"), (89.0, "89 s"), (90.0, "2 minutes"),
                                           (900.0, "15 minutes")])
def test_waits_are_told_in_seconds_then_minutes(seconds, text):
    assert access.describe_wait(seconds) == text
