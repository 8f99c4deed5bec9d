"""SPICE numbers with scale suffixes, and the IEC 60062 letter-and-digit value code.

Suffixes per the Berkeley SPICE3 user's manual: T=1e12 G=1e9 MEG=1e6 K=1e3 M=1e-3 MIL=25.4e-6
U=1e-6 N=1e-9 P=1e-12 F=1e-15, case-insensitive; letters after a suffix (or after a number
with none) are ignored, so `10uF` is 1e-5 and `10V` is 10. The micro sign `µ` reads as `u`.
"""

from __future__ import annotations

import math
import re
from typing import NamedTuple

SUFFIXES = {"t": 1e12, "g": 1e9, "meg": 1e6, "k": 1e3, "m": 1e-3, "mil": 25.4e-6,
            "u": 1e-6, "n": 1e-9, "p": 1e-12, "f": 1e-15}

_NUMBER = re.compile(r"([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)([A-Za-zµμ]*)")
# IEC 60062: the letter stands where the decimal point goes and gives the scale.
_IEC_CODE = re.compile(r"(\d*)([RKMGrkmgpnuµμPNU])(\d+)")
_IEC_SCALES = {"r": 1.0, "k": 1e3, "m": 1e6, "g": 1e9,      # resistors: R K M G
               "p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "μ": 1e-6}   # capacitors


class Number(NamedTuple):
    value: float
    suffix: str          # the scale suffix as typed ("" if none), e.g. "M", "meg", "u"
    trailing: str        # letters after the suffix, ignored, e.g. "F" in "10uF"


def scale_of(letters: str) -> tuple[float, str, str]:
    """(multiplier, suffix, trailing letters) for the letters after a number."""
    low = letters.lower().replace("µ", "u").replace("μ", "u")
    if low.startswith("meg"):
        return 1e6, letters[:3], letters[3:]
    if low.startswith("mil"):
        return 25.4e-6, letters[:3], letters[3:]
    if low and low[0] in SUFFIXES:
        return SUFFIXES[low[0]], letters[:1], letters[1:]
    return 1.0, "", letters


_READ: dict[str, Number | None] = {}     # text -> parse_number(text): a board repeats its values
_READ_MAX = 1 << 16                      # emptied when full, so that it stays small
_UNREAD = object()


def parse_number(text: str) -> Number | None:
    """A SPICE number, or None when the text is not one. Raises OverflowError past float."""
    number = _READ.get(text, _UNREAD)
    if number is not _UNREAD:
        return number
    m = _NUMBER.fullmatch(text)
    if m is None:
        number = None
    else:
        scale, suffix, trailing = scale_of(m.group(2))
        value = float(m.group(1)) * scale
        if math.isinf(value):
            raise OverflowError(text)
        number = Number(value, suffix, trailing)
    if len(_READ) >= _READ_MAX:
        _READ.clear()
    _READ[text] = number
    return number


def parse_iec_code(text: str) -> float | None:
    """The value of an IEC 60062 code such as 4k7 (4.7e3), R47 (0.47), 2u2 (2.2e-6), else None."""
    m = _IEC_CODE.fullmatch(text)
    if m is None:
        return None
    whole, letter, fraction = m.groups()
    if not whole and letter.lower() != "r":
        return None
    return float(f"{whole or '0'}.{fraction}") * _IEC_SCALES[letter.lower()]


def spice_reading_of_code(text: str) -> float | None:
    """What a SPICE simulator reads an IEC code as: the leading number and its suffix."""
    m = re.match(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?", text)
    if m is None:
        return None
    letters = re.match(r"[A-Za-zµμ]*", text[m.end():]).group()
    return float(m.group()) * scale_of(letters)[0]
