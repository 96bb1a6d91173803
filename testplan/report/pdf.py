"""The report as a PDF: jinja2 renders the HTML, weasyprint (imported only here) prints it."""

from __future__ import annotations

import base64
import datetime as dt
import json
from dataclasses import asdict
from pathlib import Path
from typing import Any

from markupsafe import Markup

from testplan.report.context import ReportContext
from testplan.report.render import environment, keep_whole


def _css_string(text: Any) -> Markup:
    """A CSS string literal: quoted, with quotes, backslashes and newlines escaped."""
    body = str(text).replace("\\", "\\\\").replace('"', '\\"').replace("\n", " ")
    return Markup(f'"{body}"')


def _b64(text: str) -> str:
    return base64.b64encode(text.encode()).decode()


def report_html(ctx: ReportContext, templates: str | Path | None = None) -> str:
    """The report as HTML (the same page weasyprint prints)."""
    env = environment(templates)
    env.filters["css_string"] = _css_string
    env.filters["b64"] = _b64
    env.filters["serials"] = keep_whole(ctx.keep_whole)  # serials and run keys
    env.filters["serials_only"] = keep_whole([r.cells[0] for r in ctx.specimens])
    return env.get_template("report.html.j2").render(c=ctx)


def report_pdf(
    ctx: ReportContext,
    templates: str | Path | None = None,
    proof: bytes | None = None,
    proof_name: str = "testplan-proof.json",
) -> bytes:
    """Print the report; the PDF's metadata carries the report number and revision, and
    ``proof`` (an issued report's) is embedded as the file ``proof_name``. Its creation date
    is the date of issue, so the same inputs print the same bytes."""
    from weasyprint import HTML, Attachment

    html = report_html(ctx, templates)
    meta = {
        "report": ctx.report_number,
        "revision": ctx.revision,
        "draft": ctx.draft,
        "manifest_root": ctx.manifest_root,
        "signers": [r.cells[:2] for r in ctx.signatures],
    }
    document = HTML(string=html, base_url=".").render()
    document.metadata.title = f"{ctx.report_number} revision {ctx.revision}"
    document.metadata.authors = [ctx.laboratory]
    document.metadata.keywords = [json.dumps(meta, sort_keys=True)]
    stamp = f"{ctx.issue_date}T00:00:00Z"
    document.metadata.created = document.metadata.modified = stamp
    when = dt.datetime.fromisoformat(stamp)
    attachments = (
        [Attachment(string=proof, base_url=".", name=proof_name, created=when, modified=when)]
        if proof is not None
        else []
    )
    pdf: bytes = document.write_pdf(attachments=attachments)
    return pdf


def context_json(ctx: ReportContext) -> dict[str, Any]:
    """The context as plain data (figures and photos without their image payloads)."""
    data = asdict(ctx)
    data.pop("calendar_svg", None)
    data.pop("as_run_svg", None)
    for run in data["runs"]:
        for f in run["figures"]:
            f.pop("svg")
        for p in run["photos"]:
            p.pop("data_uri")
    return data


def read_claims(content: bytes, name: Any) -> dict[str, Any]:
    """What a report PDF says about itself (report number, revision, manifest root), from
    its metadata. An unreadable file is a user error naming it."""
    import io

    from pypdf import PdfReader
    from pypdf.errors import PdfReadError

    from testplan.errors import TestplanError

    try:
        meta = PdfReader(io.BytesIO(content)).metadata
    except (PdfReadError, ValueError, OSError) as err:
        raise TestplanError(f"not a readable PDF ({err})", file=name) from None
    keywords = meta.get("/Keywords", "") if meta is not None else ""
    try:
        data = json.loads(str(keywords))
    except ValueError:
        data = None
    if not isinstance(data, dict) or "report" not in data:
        raise TestplanError("not a testplan report: its metadata names no report", file=name)
    return data
