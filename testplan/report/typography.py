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
    (r"\bm\^3\b", "m³"),
    (r"\bcm\^2\b", "cm²"),
    (r"\bm\^2\b", "m²"),
)


def si_text(text: str) -> str:
    """Units in a text as SI typography writes them: °C, N·mm, MΩ, m³."""
    for pattern, unit in SI_UNITS:
        text = re.sub(pattern, unit, text)
    return text
