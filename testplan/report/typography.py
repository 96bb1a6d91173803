"""Units as SI typography writes them, for text printed in reports and plots."""

from __future__ import annotations

import re

# SI typography for units written the ASCII way in records and plan texts.
SI_UNITS = (
    (r"\bdegC\b", "°C"),
    (r"\bN\*mm\b", "N·mm"),
    (r"\bN\*m\b", "N·m"),
    (r"\bGohm\b", "GΩ"),
    (r"\bMohm\b", "MΩ"),
    (r"\bkohm\b", "kΩ"),
    (r"\bohm\b", "Ω"),
    # a power written with a caret, also straight after a number ("80cm^2"), which also
    # gets the space SI puts between a number and its unit
    (r"(?<=\d)(?=[a-zA-Z]+\^[23]\b)", " "),
    (r"(?<=[a-zA-Z])\^2\b", "²"),
    (r"(?<=[a-zA-Z])\^3\b", "³"),
    # a product of units ("mbar*L/s"), an angle in degrees, comparison and multiplication
    # signs and arrows written the ASCII way
    (r"(?<=[a-zA-Z])\*(?=[a-zA-Z])", "·"),
    (r"(?<=\d) deg\b", "°"),
    (r" >= ", " ≥ "),
    (r" <= ", " ≤ "),
    (r" -> ", " → "),
    (r"(?<=\b[\dr]) x (?=U\b)", " × "),
)


def si_text(text: str) -> str:
    """Units in a text as SI typography writes them: °C, N·mm, MΩ, m³."""
    for pattern, unit in SI_UNITS:
        text = re.sub(pattern, unit, text)
    return text
