"""Numbers as people type them (forms, command lines, query strings, text files): one set of rules.

- Surrounding spaces are ignored and a minus sign (U+2212, as word processors write it) reads
  as "-".
- A decimal comma ("4,5" for 4.5) is read where the caller asks for it (forms).
- Thousands separators ("30,000", "30 000", "1,234,567.50"; ordinary, no-break or thin spaces)
  are read for money only, where the amounts are large and whole.
- The result must be finite: "nan" and "inf" are refused like any other text that is not a
  number.
- A sign rule where the field needs one: ``"positive"`` (> 0) or ``"non_negative"`` (>= 0).

Every problem is an ``InputError(field, problem)``, so the message names the field.
"""

from __future__ import annotations

import math
import re
from typing import Literal

from probewise.errors import InputError

MINUS_SIGN = "\u2212"
_SPACES = ("\u00a0", "\u202f", "\u2009", " ")  # no-break, narrow no-break, thin, plain
_DECIMAL_COMMA = re.compile(r"[-+]?\d+,\d+")
_THOUSANDS = re.compile(r"[-+]?\d{1,3}(,\d{3})+(\.\d+)?")
SHOWN_CHARS = 40  # a longer typed value is cut short in a message

Sign = Literal["positive", "non_negative"]


def _shown(text: str) -> str:
    return text if len(text) <= SHOWN_CHARS else text[: SHOWN_CHARS - 3] + "..."


def clean_number_text(text: str, *, decimal_comma: bool = False, money: bool = False) -> str:
    """Typed text made ready for ``float``: trimmed, minus sign, separators (see module doc)."""
    cleaned = text.strip().replace(MINUS_SIGN, "-")
    if money:
        for space in _SPACES:
            cleaned = cleaned.replace(space, "")
        if _THOUSANDS.fullmatch(cleaned):
            cleaned = cleaned.replace(",", "")
    if decimal_comma and _DECIMAL_COMMA.fullmatch(cleaned):
        cleaned = cleaned.replace(",", ".")
    return cleaned


def to_number(text: object, *, decimal_comma: bool = False, money: bool = False) -> float | None:
    """A finite float from typed text (or a number); None when blank or not a finite number."""
    if text is None or isinstance(text, bool):
        return None
    if isinstance(text, int | float):
        value = float(text)
    else:
        cleaned = clean_number_text(str(text), decimal_comma=decimal_comma, money=money)
        try:
            value = float(cleaned)
        except ValueError:
            return None
    return value if math.isfinite(value) else None


def read_number(
    text: object,
    field: str,
    *,
    sign: Sign | None = None,
    what: str = "number",
    decimal_comma: bool = False,
    money: bool = False,
    required: bool = True,
) -> float | None:
    """A finite float from typed text (or a number from a file); ``InputError(field, ...)`` if not.

    Parameters
    ----------
    text : str, int, float or None
        What was typed. Blank (None or only spaces) gives None, or "is required" when
        ``required``.
    field : str
        The field named in a problem (a model path, a form field, a command-line option).
    sign : {"positive", "non_negative"}, optional
        A sign the value must have; any problem then reads "must be a positive {what}, not
        ...", else "'...' is not a number".
    what : str
        The kind of value in a sign problem ("amount", "spacing in m").
    decimal_comma, money : bool
        Read "4,5" as 4.5; read thousands separators (see the module docstring).
    required : bool
        Whether a blank is a problem.
    """
    if text is None or (isinstance(text, str) and not text.strip()):
        if required:
            raise InputError(field, "is required")
        return None
    value = to_number(text, decimal_comma=decimal_comma, money=money)
    shown = _shown(str(text).strip())
    kind = "positive" if sign == "positive" else "zero or positive"
    if value is None:  # not a number, or not a finite one ("nan", "inf")
        if sign is not None:  # the field's rule says best what it wants
            raise InputError(field, f"must be a {kind} {what}, not {shown}")
        raise InputError(field, f"'{shown}' is not a number")
    if (sign == "positive" and not value > 0) or (sign == "non_negative" and not value >= 0):
        raise InputError(field, f"must be a {kind} {what}, not {shown}")
    return value
