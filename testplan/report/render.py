"""Find the templates and render HTML with jinja2 (autoescape on, strict undefined)."""

from __future__ import annotations

import re
from collections.abc import Callable
from pathlib import Path
from typing import Any

import jinja2
import markupsafe

from testplan.domain.plan import cite, shown_provenance
from testplan.errors import TestplanError
from testplan.report.names import criterion_words, words


def template_dir(override: str | Path | None = None) -> Path:
    """The folder holding the templates.

    Order: ``override``; ``testplan/templates`` inside an installed wheel (the build copies
    the top-level templates/ there); the source tree's top-level ``templates/``.
    Raises TestplanError when none exists.
    """
    if override is not None:
        path = Path(override)
        if not path.is_dir():
            raise TestplanError("template folder not found", file=path)
        return path
    here = Path(__file__).resolve().parent.parent
    for candidate in (here / "templates", here.parent / "templates"):
        if (candidate / "plan.html.j2").is_file():
            return candidate
    raise TestplanError(
        "the templates are missing from this installation", fix="reinstall testplan"
    )


def templates_sha256(override: str | Path | None = None) -> str:
    """The SHA-256 of the template set that prints: testplan's own templates (every file's
    relative path and bytes, in path order) and, with ``override`` (a lab's own folder,
    which takes precedence), that folder's files the same way after them. An approval
    records it; an issued report prints only with the same set."""
    import hashlib

    digest = hashlib.sha256()
    folders = [template_dir()] + ([template_dir(override)] if override is not None else [])
    for n, folder in enumerate(folders):
        if n:
            digest.update(b"override\0")
        for path in sorted(p for p in folder.rglob("*") if p.is_file()):
            digest.update(path.relative_to(folder).as_posix().encode() + b"\0")
            digest.update(hashlib.sha256(path.read_bytes()).digest())
    return digest.hexdigest()


def environment(override: str | Path | None = None) -> jinja2.Environment:
    """A jinja2 environment over the user's folder (if given) then the default templates."""
    loaders: list[jinja2.BaseLoader] = []
    if override is not None:
        loaders.append(jinja2.FileSystemLoader(str(template_dir(override))))
    loaders.append(jinja2.FileSystemLoader(str(template_dir())))
    env = jinja2.Environment(
        loader=jinja2.ChoiceLoader(loaders),
        autoescape=jinja2.select_autoescape(["html", "j2"]),
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters["unbroken"] = unbroken
    env.filters["status_class"] = status_class
    env.filters["cite"] = cite
    env.filters["shown_provenance"] = shown_provenance
    env.filters["words"] = words
    env.filters["criterion_words"] = criterion_words
    env.filters["digest"] = digest
    return env


def unbroken(text: str) -> markupsafe.Markup:
    """A comma-separated list of run ids or serials, each kept whole on one line."""
    parts = [markupsafe.escape(p) for p in str(text).split(", ")]
    return markupsafe.Markup(", ").join(
        markupsafe.Markup('<span class="nb">{}</span>').format(p) for p in parts
    )


def keep_whole(words: list[str]) -> Callable[[Any], markupsafe.Markup]:
    """A filter that escapes a text and keeps each of ``words`` (serials) on one line."""
    import re

    pattern = (
        re.compile(
            "|".join(
                re.escape(str(markupsafe.escape(w))) for w in sorted(words, key=len, reverse=True)
            )
        )
        if words
        else None
    )

    def whole(text: Any) -> markupsafe.Markup:
        escaped = str(markupsafe.escape(text))
        if pattern is None:
            return markupsafe.Markup(escaped)
        return markupsafe.Markup(
            pattern.sub(lambda m: f'<span class="nb">{m.group(0)}</span>', escaped)
        )

    return whole


def render(name: str, context: dict[str, Any], override: str | Path | None = None) -> str:
    """Render template ``name`` with ``context``; returns the HTML text."""
    return environment(override).get_template(name).render(**context)


def status_class(text: object) -> str:
    """The CSS class of a verdict or status text: its words before any comma or bracket
    ("invalid, repeated as ..." is ``invalid``; "conditional pass" ``conditional-pass``)."""
    head = re.split(r",| \(", str(text), maxsplit=1)[0]
    return head.replace(":", "").strip().replace(" ", "-")


_HEX = re.compile(r"[0-9a-fA-F]{16,}")


def digest(text: object, group: int = 8) -> str:
    """A text with each long hex digest in groups of ``group`` characters split by spaces,
    so a line breaks only between groups (the stored digest has no spaces)."""
    return _HEX.sub(
        lambda m: " ".join(m[0][i : i + group] for i in range(0, len(m[0]), group)), str(text)
    )
