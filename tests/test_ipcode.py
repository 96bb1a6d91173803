"""IP code parsing, validation and implication (IEC 60529, ISO 20653)."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from testplan.domain.ipcode import parse_ip_code
from testplan.errors import IPCodeError


@pytest.mark.parametrize(
    ("text", "first", "seconds", "letter", "supp"),
    [
        ("IP67", 6, (7,), None, ""),
        (
            "IP66/IP68",
            6,
            (6, 8),
            None,
            "",
        ),  # source: IEC 60529 cl. 6, multiple coding (from memory)
        ("IPX5/IPX7", None, (5, 7), None, ""),
        ("IPX8", None, (8,), None, ""),
        ("IP6X", 6, (), None, ""),
        ("IP20C", 2, (0,), "C", ""),  # source: IEC 60529 cl. 7, letter above the numeral
        ("IPXXB", None, (), "B", ""),  # source: IEC 60529 cl. 7
        ("IP23CS", 2, (3,), "C", "S"),  # source: IEC 60529 cl. 7 example
        ("IP54MW", 5, (4,), None, "MW"),
        ("IP6K9K", 6, (9,), None, ""),  # source: ISO 20653 K-forms
        ("IP5K4K", 5, (4,), None, ""),
        ("IPX6K", None, (6,), None, ""),
        ("IPX9", None, (9,), None, ""),  # source: IEC 60529 Amd 2 (2013) added numeral 9
    ],
)
def test_valid_codes(
    text: str, first: int | None, seconds: tuple[int, ...], letter: str | None, supp: str
) -> None:
    code = parse_ip_code(text)
    assert (code.first, code.seconds, code.letter, code.supplementary) == (
        first,
        seconds,
        letter,
        supp,
    )


@pytest.mark.parametrize(
    ("text", "reason"),
    [
        ("IP7X", "first numeral runs from 0 to 6"),  # source: IEC 60529 cl. 5
        ("IP6", "both characteristic numerals"),  # source: IEC 60529 cl. 4
        ("IPX-8", "no hyphen"),  # source: IEC 60529 cl. 4
        ("IP54D", "redundant"),  # source: IEC 60529 cl. 7 (letter only above the numeral)
        ("IP4XD", "redundant"),
        ("IP2XA", "redundant"),
        ("IP6X/IP5X", "disagree on the first numeral"),
        ("IPX6/IPX6K", "different tests"),  # source: IEC 60529 cl. 14.2.6; ISO 20653 6K
        ("IPX6K/IPX6", "different tests"),
        ("IPX5/IPX6", "cumulative"),  # source: IEC 60529 cl. 6 (up to 6 cumulative)
        ("IP65SM", "alphabetical"),
        ("IP65MS", "exclude each other"),
        ("IP6XM", "no water numeral"),  # source: IEC 60529 cl. 8, M and S describe the water test
        ("IP60S", "no water numeral"),  # source: IEC 60529 cl. 8
        ("IP6XS/IP6XS", "no water numeral"),  # source: IEC 60529 cl. 8
        ("IP65Q", "not a supplementary letter"),
        ("IP3K4", "5K and 6K"),
        ("IPX5K", "4K, 6K and 9K"),
        ("ip67", "capitals"),
        ("", "empty"),
        ("IPXA", "both characteristic numerals"),
        ("IP667", "not an IP code"),
    ],
)
def test_refused_codes_give_the_reason(text: str, reason: str) -> None:
    with pytest.raises(IPCodeError) as info:
        parse_ip_code(text)
    assert reason in info.value.one_line()


def test_water_letter_with_a_water_numeral_in_a_dual_marking_is_accepted() -> None:
    # source: IEC 60529 cl. 8, M/S apply to the water test of the marking
    assert parse_ip_code("IP6X/IPX7M").supplementary == "M"


def test_first_numerals_imply_lower_ones() -> None:
    # source: IEC 60529 cl. 5, first numerals cumulative
    assert parse_ip_code("IP5X").implied_first() == [1, 2, 3, 4]
    assert parse_ip_code("IP5X").access_letter == "D"  # 5 and 6 also keep the 1.0 mm wire out


def test_second_numerals_cumulative_only_up_to_6() -> None:
    # source: IEC 60529 cl. 6, table of multiple coding (from memory): 7, 8, 9 imply nothing
    assert parse_ip_code("IPX6").implied_seconds() == [1, 2, 3, 4, 5]
    assert parse_ip_code("IPX7").implied_seconds() == []
    assert parse_ip_code("IPX8").implied_seconds() == []
    assert parse_ip_code("IPX9").implied_seconds() == []
    assert parse_ip_code("IP66/IP68").implied_seconds() == [1, 2, 3, 4, 5]
    assert parse_ip_code("IPX5/IPX7").implied_seconds() == [1, 2, 3, 4]


@given(st.text(alphabet="IPXK0123456789ABCDHMSW/- ", max_size=14))
def test_parser_raises_only_our_error(text: str) -> None:
    try:
        code = parse_ip_code(text)
    except IPCodeError as err:
        assert err.one_line()
        return
    assert code.text == text.strip()


@given(st.text(max_size=20))
def test_any_text_gives_a_code_or_our_error(text: str) -> None:
    try:
        parse_ip_code(text)
    except IPCodeError:
        pass
