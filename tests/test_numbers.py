"""The one parser of typed numbers (server/numbers.py): its rules and its messages."""

import pytest

from probewise.errors import InputError
from probewise.numbers import read_number, to_number


@pytest.mark.parametrize(
    ("text", "options", "expected"),
    [
        (" 12 ", {}, 12.0),
        ("\u22124.5", {}, -4.5),  # minus sign as word processors write it
        ("4,5", {"decimal_comma": True}, 4.5),
        ("4,5", {}, None),  # a comma is not a decimal point unless asked for
        ("30,000", {"money": True}, 30000.0),
        ("30\u00a0000", {"money": True}, 30000.0),
        ("1,234,567.50", {"money": True}, 1234567.5),
        ("nan", {}, None),
        ("inf", {}, None),
        ("", {}, None),
        (7, {}, 7.0),
    ],
)
def test_to_number_reads_what_people_type(text, options, expected):
    assert to_number(text, **options) == expected


@pytest.mark.parametrize(
    ("text", "options", "problem"),
    [
        ("", {}, "is required"),
        ("abc", {}, "'abc' is not a number"),
        ("Infinity", {}, "'Infinity' is not a number"),
        ("0", {"sign": "positive", "what": "amount"}, "must be a positive amount, not 0"),
        ("nan", {"sign": "positive"}, "must be a positive number, not nan"),
        ("lots", {"sign": "positive", "what": "amount"}, "must be a positive amount, not lots"),
        ("-1", {"sign": "non_negative"}, "must be a zero or positive number, not -1"),
    ],
)
def test_read_number_names_the_field(text, options, problem):
    with pytest.raises(InputError) as refused:
        read_number(text, "budget", **options)
    assert (refused.value.field, refused.value.problem) == ("budget", problem)


def test_read_number_blank_is_none_when_optional():
    assert read_number("  ", "depth_m", required=False) is None
    assert read_number("0", "depth_m", sign="non_negative") == 0.0
