"""IP codes per IEC 60529 (with ISO 20653 K-forms): parsing, validation and implication.

``parse_ip_code("IP66/IP68")`` returns an ``IPCode`` that lists the first numeral,
every declared second numeral, letters and the vehicle K-forms. Implication rules:

* first numerals imply all lower ones (cl. 5); 5 and 6 also imply access protection
  against the 1.0 mm wire;
* second numerals up to and including 6 imply all lower ones (cl. 6);
* 7, 8 and 9 imply nothing else: a product also meeting jets is dual coded (IPX6/IPX8).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from testplan.errors import IPCodeError

# Access level each first numeral gives, as the additional letter it corresponds to.
# 0 gives none; 5 and 6 give the wire (D) like 4.
FIRST_NUMERAL_ACCESS: dict[int, str | None] = {
    0: None,
    1: "A",
    2: "B",
    3: "C",
    4: "D",
    5: "D",
    6: "D",
}
LETTER_ORDER = "ABCD"
SUPPLEMENTARY = "HMSW"

_SEGMENT = re.compile(
    r"^IP(?P<first>[0-9X])(?P<first_k>K?)(?P<second>[0-9X])(?P<second_k>K?)"
    r"(?P<letter>[A-D]?)(?P<supp>[A-Z]*)$"
)


@dataclass(frozen=True)
class IPCode:
    """A validated IP code, possibly dual coded.

    ``first`` is None for X; ``seconds`` holds every declared second numeral
    (empty for X). ``first_k``/``seconds_k`` mark ISO 20653 K-forms.
    """

    text: str
    first: int | None
    first_k: bool
    seconds: tuple[int, ...]
    seconds_k: frozenset[int] = field(default_factory=frozenset)
    letter: str | None = None
    supplementary: str = ""

    def implied_first(self) -> list[int]:
        """First numerals implied by the declared one (lower numerals, IEC 60529 cl. 5)."""
        if self.first is None:
            return []
        return list(range(1, self.first))

    def implied_seconds(self) -> list[int]:
        """Second numerals implied by declared ones (up to 6 cumulative, IEC 60529 cl. 6)."""
        cumulative = [s for s in self.seconds if s <= 6 and s not in self.seconds_k]
        if not cumulative:
            return []
        top = max(cumulative)
        return [n for n in range(1, top) if n not in self.seconds]

    @property
    def access_letter(self) -> str | None:
        """Highest access protection claimed: the letter if given, else from the numeral."""
        if self.letter:
            return self.letter
        if self.first is None:
            return None
        return FIRST_NUMERAL_ACCESS[self.first]


def _parse_segment(seg: str, whole: str) -> IPCode:
    if "-" in seg or " " in seg:
        raise IPCodeError(
            f"{whole!r}: an IP code has no hyphen or space inside it",
            fix="write e.g. IPX8, not IPX-8",
        )
    m = _SEGMENT.match(seg)
    if m is None:
        if re.match(r"^IP[0-9X]K?[A-DHMSW]*$", seg):
            raise IPCodeError(
                f"{whole!r}: both characteristic numerals are needed",
                fix="write X for a numeral that is not specified, e.g. IP6X",
            )
        if re.match(r"^IP[7-9]", seg):
            raise IPCodeError(
                f"{whole!r}: the first numeral runs from 0 to 6 (or X)",
            )
        raise IPCodeError(
            f"{whole!r} is not an IP code",
            fix="expected IP + first numeral 0-6/X + second numeral 0-9/X + optional letters",
        )
    first_text, second_text = m["first"], m["second"]
    first = None if first_text == "X" else int(first_text)
    if first is not None and first > 6:
        raise IPCodeError(f"{whole!r}: the first numeral runs from 0 to 6 (or X)")
    first_k = bool(m["first_k"])
    if first_k and first not in (5, 6):
        raise IPCodeError(f"{whole!r}: only 5K and 6K exist as first-numeral K-forms (ISO 20653)")
    second = None if second_text == "X" else int(second_text)
    second_k = bool(m["second_k"])
    if second_k and second not in (4, 6, 9):
        raise IPCodeError(
            f"{whole!r}: only 4K, 6K and 9K exist as second-numeral K-forms (ISO 20653)"
        )
    letter = m["letter"] or None
    supp = m["supp"]
    for ch in supp:
        if ch not in SUPPLEMENTARY:
            raise IPCodeError(f"{whole!r}: {ch!r} is not a supplementary letter (H, M, S or W)")
    if len(set(supp)) != len(supp):
        raise IPCodeError(f"{whole!r}: a supplementary letter is repeated")
    if "".join(sorted(supp)) != supp:
        raise IPCodeError(
            f"{whole!r}: supplementary letters go in alphabetical order",
            fix=f"write {''.join(sorted(supp))}",
        )
    if "M" in supp and "S" in supp:
        raise IPCodeError(
            f"{whole!r}: M (parts moving) and S (parts still) exclude each other",
            fix="leave both out to claim protection moving and still",
        )
    if letter is not None and first is not None:
        given = FIRST_NUMERAL_ACCESS[first]
        if given is not None and LETTER_ORDER.index(letter) <= LETTER_ORDER.index(given):
            raise IPCodeError(
                f"{whole!r}: letter {letter} is redundant, first numeral {first} already "
                f"gives access protection {given}",
                fix=f"drop the letter: IP{first_text}{second_text}{supp}",
            )
    seconds = () if second is None else (second,)
    return IPCode(
        text=seg,
        first=first,
        first_k=first_k,
        seconds=seconds,
        seconds_k=frozenset(seconds if second_k else ()),
        letter=letter,
        supplementary=supp,
    )


def parse_ip_code(text: str) -> IPCode:
    """Parse and validate an IP code such as ``IP66/IP68``, ``IP6K9K`` or ``IP20C``.

    Dual codes list full codes separated by ``/``; their first numerals must agree
    (or be X). Raises IPCodeError with the reason for anything not allowed.
    """
    if not isinstance(text, str):
        raise IPCodeError(f"expected an IP code string, got {text!r}")
    whole = text.strip()
    if not whole:
        raise IPCodeError("the IP code is empty", fix='write e.g. "IP66/IP68"')
    if whole != whole.upper() or not whole.startswith("IP"):
        raise IPCodeError(
            f"{whole!r} is not an IP code",
            fix="IP codes are written in capitals and start with IP, e.g. IP67",
        )
    parts = [_parse_segment(seg, whole) for seg in whole.split("/")]
    if len(parts) == 1:
        return _water_letters_need_water(parts[0], whole)
    firsts = {p.first for p in parts if p.first is not None}
    if len(firsts) > 1:
        raise IPCodeError(
            f"{whole!r}: the codes of a dual marking disagree on the first numeral",
        )
    first = next(iter(firsts)) if firsts else None
    first_k = any(p.first_k for p in parts if p.first is not None)
    seconds: list[int] = []
    seconds_k: set[int] = set()
    for p in parts:
        for s in p.seconds:
            if s in seconds:
                if (s in seconds_k) != (s in p.seconds_k):
                    raise IPCodeError(
                        f"{whole!r}: {s} (IEC 60529) and {s}K (ISO 20653) are different tests "
                        "that this campaign cannot hold both of",
                        fix=f"plan IPX{s} and IPX{s}K in separate campaign files",
                    )
                raise IPCodeError(f"{whole!r}: second numeral {s} is listed twice")
            seconds.append(s)
        seconds_k |= p.seconds_k
    cumulative = [s for s in seconds if s <= 6]
    if len(cumulative) > 1:
        raise IPCodeError(
            f"{whole!r}: numerals up to 6 are cumulative, so only the highest is marked",
            fix=f"keep IPX{max(cumulative)} and drop the lower one",
        )
    letters = {p.letter for p in parts if p.letter}
    if len(letters) > 1:
        raise IPCodeError(f"{whole!r}: the codes of a dual marking disagree on the letter")
    supps = {p.supplementary for p in parts if p.supplementary}
    if len(supps) > 1:
        raise IPCodeError(
            f"{whole!r}: the codes of a dual marking disagree on supplementary letters"
        )
    code = IPCode(
        text=whole,
        first=first,
        first_k=first_k,
        seconds=tuple(sorted(seconds)),
        seconds_k=frozenset(seconds_k),
        letter=next(iter(letters)) if letters else None,
        supplementary=next(iter(supps)) if supps else "",
    )
    return _water_letters_need_water(code, whole)


def _water_letters_need_water(code: IPCode, whole: str) -> IPCode:
    """Refuse M or S (water test moving/still, IEC 60529 cl. 8) on a code with no water test."""
    water = [ch for ch in code.supplementary if ch in "MS"]
    if water and not any(code.seconds):
        raise IPCodeError(
            f"{whole!r}: supplementary letter {water[0]} describes the water test, but the code "
            "has no water numeral",
            fix=f"give a second numeral 1-9 or drop {water[0]}",
        )
    return code
