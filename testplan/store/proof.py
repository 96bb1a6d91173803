"""The proof an issued report carries, its signed tail, and checking both without the store.

The issued file is the *base* PDF, which embeds ``PROOF_NAME`` (the manifest, every
signature with its context, the signers' and the issuer's keys with their enrolment chains
and dated role grants, the run records, the results the report states), followed by a
small incremental update, the *tail*, that holds the issuer's signed record: report number,
revision, date of issue, campaign, manifest root, the base's length and SHA-256. A file
cannot hold its own hash, hence the split; the tail is a function of (base, record), so
``check`` rebuilds it and compares byte for byte, and nothing can be appended unseen.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import json
import re
import uuid
from typing import Any

import sqlalchemy as sa
from sqlmodel import Session, SQLModel, col, select

from testplan import keys
from testplan.store import audit
from testplan.store.identity import Trust, signature_problem
from testplan.store.tables import (
    CampaignRecord,
    Judgement,
    KeyRevocation,
    Manifest,
    Person,
    PersonKey,
    RoleGrant,
    RunRecord,
    RunSpecimen,
    SpecimenRecord,
    StoreMeta,
    UTCDateTime,
    VerdictRecord,
)

PROOF_NAME = "testplan-proof.json"
PROOF_FORMAT = 1
ISSUE_FORMAT = 1
MARK = b"\n%testplan-issue\n"  # the tail starts here; the base is everything before it


def _plain(value: Any) -> Any:
    """``value`` as JSON would give it back (UUIDs and times as text)."""
    return json.loads(audit.canonical(value))


def _plain_dict(value: dict[str, Any]) -> dict[str, Any]:
    out: dict[str, Any] = _plain(value)
    return out


def results_sha256(value: Any) -> str:
    return hashlib.sha256(audit.canonical(value).encode()).hexdigest()


def results(session: Session, campaign: CampaignRecord) -> dict[str, Any]:
    """What the report states, as plain data: each run with its dates, state and latest
    judgement's verdict per criterion and specimen, the specimens and legs, and the
    campaign's roll-up (runs, specimens, legs, claims)."""
    from testplan.store.judging import rollup

    specimens = {
        s.id: s
        for s in session.exec(
            select(SpecimenRecord).where(SpecimenRecord.campaign_id == campaign.id)
        )
    }
    runs = []
    for run in session.exec(
        select(RunRecord).where(RunRecord.campaign_id == campaign.id).order_by(col(RunRecord.key))
    ):
        last = session.exec(
            select(Judgement)
            .where(Judgement.run_id == run.id)
            .order_by(col(Judgement.judged_at).desc())
        ).first()
        verdicts = []
        if last is not None:
            for v in session.exec(
                select(VerdictRecord).where(VerdictRecord.judgement_id == last.id)
            ):
                serial = specimens[v.specimen_id].serial if v.specimen_id in specimens else None
                verdicts.append(
                    {
                        "criterion": v.criterion_key,
                        "quantity": v.quantity,
                        "specimen": serial,
                        "outcome": v.outcome,
                        "measured": v.measured,
                        "unit": v.unit,
                        "limits": [v.limit_min, v.limit_max],
                        "acceptance": [v.accept_min, v.accept_max],
                    }
                )
        verdicts.sort(key=lambda x: (x["criterion"], x["specimen"] or ""))
        members = sorted(
            specimens[link.specimen_id].serial
            for link in session.exec(select(RunSpecimen).where(RunSpecimen.run_id == run.id))
            if link.specimen_id in specimens
        )
        runs.append(
            {
                "run": run.key,
                "procedure": run.procedure_key,
                "leg": run.leg,
                "state": run.state,
                "specimens": members,
                "finished_at": run.finished_at,
                "checked_at": run.checked_at,
                "invalid_reason": run.invalid_reason,
                "outcome": last.outcome if last else None,
                "verdicts": verdicts,
            }
        )
    return _plain_dict(
        {
            "campaign": {
                "reference": campaign.reference,
                "title": campaign.title,
                "client": campaign.client,
                "laboratory": campaign.laboratory,
            },
            "specimens": sorted(
                ({"specimen": s.serial, "leg": s.leg} for s in specimens.values()),
                key=lambda x: x["specimen"],
            ),
            "runs": runs,
            "rollup": rollup(session, campaign).to_json(),
        }
    )


# --- identity: the rows a verifier needs, and loading them back ---------------------------

IDENTITY = {"people": Person, "keys": PersonKey, "grants": RoleGrant, "revocations": KeyRevocation}


def _row(obj: Any) -> dict[str, Any]:
    return _plain_dict({c.name: getattr(obj, c.name) for c in obj.__table__.columns})


def identity_rows(
    session: Session, people: set[uuid.UUID], until: dt.datetime
) -> dict[str, list[dict[str, Any]]]:
    """The people, their keys, grants and revocations known at ``until``, closed over who
    enrolled each key and who signed each grant: every row ``identity.signature_problem``
    reads to follow a signer back to the trusted manager keys."""
    found: dict[str, dict[uuid.UUID, Any]] = {name: {} for name in IDENTITY}
    todo = set(people)
    while todo:
        pid = todo.pop()
        person = session.get(Person, pid)
        if person is None or pid in found["people"]:
            continue
        found["people"][pid] = person
        for key in session.exec(
            select(PersonKey).where(PersonKey.person_id == pid, PersonKey.registered_at <= until)
        ):
            found["keys"][key.id] = key
            enroller = (
                session.get(PersonKey, key.enrolled_by_key_id) if key.enrolled_by_key_id else None
            )
            if enroller is not None:
                todo.add(enroller.person_id)
            for rev in session.exec(
                select(KeyRevocation).where(
                    KeyRevocation.key_id == key.id, KeyRevocation.recorded_at <= until
                )
            ):
                found["revocations"][rev.id] = rev
        for grant in session.exec(
            select(RoleGrant).where(RoleGrant.person_id == pid, RoleGrant.at <= until)
        ):
            found["grants"][grant.id] = grant
            if grant.by_person_id is not None:
                todo.add(grant.by_person_id)
    return {name: [_row(rows[k]) for k in sorted(rows, key=str)] for name, rows in found.items()}


def _load(model: Any, data: dict[str, Any]) -> Any:
    values: dict[str, Any] = {}
    for column in model.__table__.columns:
        value = data.get(column.name)
        if value is not None:
            if isinstance(column.type, UTCDateTime):
                value = dt.datetime.fromisoformat(value)
            elif isinstance(column.type, sa.Date):
                value = dt.date.fromisoformat(value)
            elif column.type.python_type is uuid.UUID:
                value = uuid.UUID(value)
        values[column.name] = value
    return model(**values)


def identity_session(rows: dict[str, list[dict[str, Any]]]) -> Session:
    """A throwaway in-memory store holding only the proof's identity rows, so the checks
    that run against a store (``identity.signature_problem``) run on the proof alone."""
    engine = sa.create_engine("sqlite://")
    tables = [m.__table__ for m in (*IDENTITY.values(), StoreMeta)]  # type: ignore[attr-defined]
    SQLModel.metadata.create_all(engine, tables=tables)
    session = Session(engine)
    for name, model in IDENTITY.items():
        for data in rows[name]:
            session.add(_load(model, data))
    session.flush()
    return session


# --- building the proof -------------------------------------------------------------------


def build(
    session: Session,
    *,
    campaign: CampaignRecord,
    manifest: Manifest,
    report_number: str,
    revision: int,
    issue_date: dt.date,
    issuer: Person,
    issuer_key: PersonKey,
    issued_at: dt.datetime,
) -> dict[str, Any]:
    """The proof for an approved manifest, as plain data (``PROOF_NAME``'s content)."""
    from testplan.store.signoff import ORDER, run_body, signatures_of

    sigs = signatures_of(session, manifest)
    signatures = []
    for role in ORDER:
        s = sigs[role]
        person = session.get(Person, s.person_id)
        key = session.get(PersonKey, s.key_id)
        assert person is not None and key is not None
        signatures.append(
            {
                "role": role,
                "signer": person.initials,
                "person_id": person.id,
                "signed_at": s.signed_at,
                "context": json.loads(s.context_json) if s.context_json else None,
                "signature": s.signature,
                "fingerprint": key.fingerprint,
            }
        )
    approval = json.loads(sigs["approved"].context_json or "{}")
    runs = session.exec(select(RunRecord).where(RunRecord.campaign_id == campaign.id)).all()
    people = {s.person_id for s in sigs.values()} | {issuer.id}
    return _plain_dict(
        {
            "testplan_proof": PROOF_FORMAT,
            "report": {
                "number": report_number,
                "revision": revision,
                "issue_date": issue_date,
                "campaign": campaign.reference,
            },
            "manifest": {"root": manifest.root, "items": json.loads(manifest.body_json)},
            "signatures": signatures,
            "issuer": {
                "initials": issuer.initials,
                "person_id": issuer.id,
                "fingerprint": issuer_key.fingerprint,
                "issued_at": issued_at,
            },
            "identity": identity_rows(session, people, issued_at),
            "audit_head": approval.get("audit_head"),
            "runs": sorted(
                ({"id": r.id, "body": audit.canonical(run_body(session, r))} for r in runs),
                key=lambda x: str(x["id"]),
            ),
            "results": results(session, campaign),
        }
    )


def proof_bytes(proof: dict[str, Any]) -> bytes:
    return audit.canonical(proof).encode()


# --- the issue record and the tail --------------------------------------------------------


def issue_body(proof: dict[str, Any], base: bytes) -> dict[str, Any]:
    """What the issuer signs: the report's identity, the manifest root and the base PDF."""
    report, issuer = proof["report"], proof["issuer"]
    return {
        "testplan_issue": ISSUE_FORMAT,
        "report": report["number"],
        "revision": report["revision"],
        "issue_date": report["issue_date"],
        "campaign": report["campaign"],
        "root": proof["manifest"]["root"],
        "issuer": issuer["initials"],
        "fingerprint": issuer["fingerprint"],
        "issued_at": issuer["issued_at"],
        "base_length": len(base),
        "base_sha256": hashlib.sha256(base).hexdigest(),
    }


def issue_message(record: dict[str, Any]) -> bytes:
    return audit.canonical({k: v for k, v in record.items() if k != "signature"}).encode()


class NotAProofError(ValueError):
    """The bytes are not a PDF testplan can read a proof or tail from."""


def _trailer(base: bytes) -> tuple[int, str, str | None, int]:
    """The base's last cross-reference offset, /Root and /Info references and /Size."""
    from pypdf import PdfReader

    found = re.search(rb"startxref\s+(\d+)\s+%%EOF\s*\Z", base)
    if found is None:
        raise NotAProofError("no end-of-file marker")
    try:
        trailer = PdfReader(io.BytesIO(base)).trailer
        root = trailer.raw_get("/Root")
        info = trailer.raw_get("/Info") if "/Info" in trailer else None
        size = int(str(trailer["/Size"]))
    except Exception as err:  # pypdf raises many kinds on damaged input
        raise NotAProofError(str(err) or type(err).__name__) from None

    def ref(obj: Any) -> str:
        return f"{obj.idnum} {obj.generation} R"

    return int(found.group(1)), ref(root), ref(info) if info is not None else None, size


def tail(base: bytes, record: dict[str, Any]) -> bytes:
    """The incremental update that carries ``record``: one object holding its canonical JSON
    and an uncompressed cross-reference stream. The same (base, record) gives the same bytes."""
    prev, root, info, size = _trailer(base)
    body = audit.canonical(record).encode().hex().upper()
    out = bytearray(MARK)
    first = len(base) + len(out)
    out += f"{size} 0 obj\n<</Type /TestplanIssue /Record <{body}>>>\nendobj\n".encode()
    second = len(base) + len(out)
    entries = b"".join(b"\x01" + at.to_bytes(4, "big") + b"\x00\x00" for at in (first, second))
    info_ref = f" /Info {info}" if info else ""
    head = (
        f"{size + 1} 0 obj\n<</Type /XRef /Size {size + 2} /Index [{size} 2] /W [1 4 2] "
        f"/Root {root}{info_ref} /Prev {prev} /Length {len(entries)}>>\nstream\n"
    )
    out += head.encode() + entries + b"\nendstream\nendobj\n"
    out += f"startxref\n{second}\n%%EOF\n".encode()
    return bytes(out)


def split(content: bytes) -> tuple[bytes, dict[str, Any] | None]:
    """The base and the issue record of an issued file (record None: no tail)."""
    at = content.rfind(MARK)
    if at < 0:
        return content, None
    found = re.search(rb"/Record <([0-9A-F]*)>", content[at:])
    try:
        record = json.loads(bytes.fromhex(found.group(1).decode())) if found else None
    except ValueError:
        record = None
    if not isinstance(record, dict):
        raise NotAProofError("its issue record cannot be read")
    return content[:at], record


def read_proof(base: bytes) -> dict[str, Any] | None:
    """The proof embedded in a PDF, None when it has none."""
    from pypdf import PdfReader

    try:
        files = PdfReader(io.BytesIO(base)).attachments
        found = files.get(PROOF_NAME)
    except Exception as err:  # pypdf raises many kinds on damaged input
        raise NotAProofError(str(err) or type(err).__name__) from None
    if not found:
        return None
    if len(found) != 1:
        return {"malformed": f"{len(found)} files named {PROOF_NAME}"}
    try:
        proof = json.loads(found[0])
    except ValueError:
        return {"malformed": "not JSON"}
    return proof if isinstance(proof, dict) else {"malformed": "not an object"}


# --- checking a proof without the store ---------------------------------------------------


def check(content: bytes, trust: set[str]) -> tuple[list[str], list[str]]:
    """Everything an issued PDF's proof lets one check without the store: (lines, problems).

    Raises NotAProofError when the file is not a PDF with a testplan proof."""
    base, record = split(content)
    proof = read_proof(base)
    if proof is None:
        raise NotAProofError(f"it embeds no {PROOF_NAME}")
    if "malformed" in proof:
        return [], [f"the proof is malformed: {proof['malformed']}"]
    try:
        return _check(content, base, record, proof, trust)
    except (KeyError, TypeError, ValueError, AttributeError, IndexError) as err:
        return [], [f"the proof is malformed ({type(err).__name__}: {err})"]


def _check(
    content: bytes,
    base: bytes,
    record: dict[str, Any] | None,
    proof: dict[str, Any],
    trust_fps: set[str],
) -> tuple[list[str], list[str]]:
    from testplan.store.signoff import ORDER, ROLES, _h, _person_body, message

    lines: list[str] = []
    problems: list[str] = []
    if proof.get("testplan_proof") != PROOF_FORMAT:
        return [], [f"the proof's format is not {PROOF_FORMAT}"]
    report = proof["report"]
    lines.append(
        f"proof: {report['number']} revision {report['revision']} of {report['campaign']}, "
        f"issued {report['issue_date']}"
    )
    items, root = proof["manifest"]["items"], proof["manifest"]["root"]
    if _h(items) != root:
        problems.append("the proof's manifest items do not give its root")
    hashes = {(k, i): h for k, i, _label, h in items}
    checks: list[tuple[dt.datetime, str]] = []
    bodies = {}
    for run in proof["runs"]:
        body = run["body"]
        if hashes.get(("run", run["id"])) != hashlib.sha256(body.encode()).hexdigest():
            problems.append(f"run record {run['id']} in the proof is not the one signed")
            continue
        bodies[run["id"]] = data = json.loads(body)
        if data.get("checked_at"):
            checks.append((dt.datetime.fromisoformat(data["checked_at"]), data["key"]))
    for kind, ident in hashes:
        if (
            kind == "run"
            and ident not in bodies
            and not any(p.startswith(f"run record {ident}") for p in problems)
        ):
            problems.append(f"the proof leaves out run record {ident}")
    session = identity_session(proof["identity"])
    try:
        people = {str(p.id): p for p in session.exec(select(Person))}
        held = {k.fingerprint: k for k in session.exec(select(PersonKey))}
        sigs = {s["role"]: s for s in proof["signatures"]}
        times: list[tuple[str, dt.datetime]] = []
        for role in ORDER:
            s = sigs.get(role)
            if s is None:
                problems.append(f"the proof has no {role} signature")
                continue
            person, key = people.get(s["person_id"]), held.get(s["fingerprint"])
            if person is None or key is None or person.initials != s["signer"]:
                problems.append(f"{role} signature: the proof does not hold its signer's key")
                continue
            at = dt.datetime.fromisoformat(s["signed_at"])
            msg = message(root, role, report["campaign"], person.initials, at, s["context"])
            problem = signature_problem(
                session,
                person=person,
                key=key,
                role=ROLES[role],
                at=at,
                message=msg,
                signature=s["signature"],
                trust=Trust(trust_fps),
            )
            if problem is None and s["context"] is not None:
                if _h(_person_body(person)) != s["context"]["signer_sha256"]:
                    problem = "the signer's person record in the proof is not the one signed"
            if problem is not None:
                problems.append(f"{role} signature of {person.initials}: {problem}")
            else:
                lines.append(
                    f"{role}: {person.name} ({person.initials}), key {key.fingerprint[:16]}"
                )
            times.append((role, at))
        problems.extend(_time_problems(times, checks))
        approval = (sigs.get("approved") or {}).get("context") or {}
        if "results_sha256" not in approval:
            problems.append(
                "the approval does not cover the results it states (approved before approvals "
                "signed them); only `verify --db STORE` can check this report"
            )
        elif approval["results_sha256"] != results_sha256(proof["results"]):
            problems.append(
                "the results in the proof are not the ones approved (their SHA-256 differs "
                "from the approval's)"
            )
        if approval.get("audit_head") != proof["audit_head"]:
            problems.append("the proof's audit-chain head is not the one the approval saw")
        problems.extend(_issue_problems(content, base, record, proof, session, trust_fps, times))
    finally:
        session.close()
    if proof["audit_head"]:
        head = proof["audit_head"]
        lines.append(f"audit chain at approval: {head['length']} entries, head {head['hash'][:16]}")
    lines.append(f"manifest root {root} over {len(items)} records")
    return lines, problems


def _time_problems(
    times: list[tuple[str, dt.datetime]], checks: list[tuple[dt.datetime, str]]
) -> list[str]:
    out = []
    for (before, t0), (after, t1) in zip(times, times[1:], strict=False):
        if t1 < t0:
            out.append(
                f"{after} signature ({t1:%Y-%m-%d %H:%M} UTC) is dated before the {before} "
                f"one ({t0:%Y-%m-%d %H:%M} UTC)"
            )
    if checks and times:
        last, run = max(checks)
        role, first = min(times, key=lambda x: x[1])
        if first < last:
            out.append(
                f"{role} signature ({first:%Y-%m-%d %H:%M} UTC) is dated before the data "
                f"check of run {run} ({last:%Y-%m-%d %H:%M} UTC)"
            )
    return out


def _issue_problems(
    content: bytes,
    base: bytes,
    record: dict[str, Any] | None,
    proof: dict[str, Any],
    session: Session,
    trust_fps: set[str],
    times: list[tuple[str, dt.datetime]],
) -> list[str]:
    """The issuer's signed tail: there, exactly as rebuilt, over this base and this proof."""
    if record is None:
        return ["the PDF carries no issue signature (not an issued report)"]
    out = []
    if record != {**issue_body(proof, base), "signature": record.get("signature")}:
        out.append(
            "the issue record does not match this PDF and its proof (report, revision, date "
            "of issue, manifest root or the PDF before the tail differ)"
        )
    try:
        rebuilt = tail(base, record)
    except NotAProofError as err:
        rebuilt = f"{err}".encode()
    if base + rebuilt != content:
        out.append(
            "the PDF was changed or added to after it was issued (its tail is not the issued one)"
        )
    issuer = proof["issuer"]
    person = session.get(Person, uuid.UUID(issuer["person_id"]))
    key = session.exec(
        select(PersonKey).where(PersonKey.fingerprint == record.get("fingerprint"))
    ).first()
    if person is None or key is None:
        return [*out, "issue signature: the proof does not hold the issuer's key"]
    at = dt.datetime.fromisoformat(record["issued_at"])
    problem = signature_problem(
        session,
        person=person,
        key=key,
        role="approver",
        at=at,
        message=issue_message(record),
        signature=record.get("signature"),
        trust=Trust(trust_fps),
    )
    if problem is not None:
        out.append(f"issue signature of {person.initials}: {problem}")
    approved = dict(times).get("approved")
    day = dt.date.fromisoformat(record["issue_date"])
    if approved is not None and day < approved.date():
        out.append(
            f"date of issue {day:%Y-%m-%d} is before the approval ({approved:%Y-%m-%d %H:%M} UTC)"
        )
    return out


def sign_issue(
    private_key: Any, proof: dict[str, Any], base: bytes
) -> tuple[dict[str, Any], bytes]:
    """The issuer's signed record over ``base`` and the whole issued file."""
    body = issue_body(proof, base)
    record = {**body, "signature": keys.sign(private_key, issue_message(body))}
    return record, base + tail(base, record)
