"""The audit trail: append-only, each entry hash-chained to the one before it.

An entry's hash covers its sequence number, time, actor, action, entity, reason, old and
new values and the previous entry's hash, serialised as canonical JSON. Changing,
deleting or inserting an entry behind the tool's back breaks the chain at that point;
``check_store`` finds it, and also re-hashes every raw file and every import's samples.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import uuid
from dataclasses import dataclass
from typing import Any

import sqlalchemy as sa
from sqlmodel import Session, col, select

from testplan.store.tables import AuditEntry, RawFile, StoreMeta, utc_now

GENESIS = "0" * 64


def canonical(value: Any) -> str:
    """Deterministic JSON: sorted keys, no spaces, UUIDs and datetimes as ISO text."""
    return json.dumps(
        value,
        sort_keys=True,
        separators=(",", ":"),
        ensure_ascii=False,
        default=_plain,
        allow_nan=False,
    )


def _plain(value: Any) -> Any:
    if isinstance(value, uuid.UUID):
        return str(value)
    if isinstance(value, dt.datetime):
        return value.astimezone(dt.UTC).isoformat()
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, bytes):
        return hashlib.sha256(value).hexdigest()
    raise TypeError(f"cannot put {type(value).__name__} in the audit trail")


def content_sha256(content: Any, what: str) -> str:
    """The SHA-256 of stored bytes; content of another type (text written behind the tool's
    back) gets a marker hash that matches nothing, so verify names the record as changed."""
    if isinstance(content, memoryview):
        content = content.tobytes()
    if isinstance(content, bytes):
        return hashlib.sha256(content).hexdigest()
    return f"wrongly typed: {what} holds {type(content).__name__}, not bytes"


def entry_hash(entry: AuditEntry) -> str:
    """The hash an entry must carry, from its content and the previous hash."""
    body = {
        "seq": entry.seq,
        "at": entry.at.astimezone(dt.UTC).isoformat(),
        "actor": entry.actor,
        "action": entry.action,
        "entity": entry.entity,
        "entity_id": entry.entity_id,
        "campaign_id": str(entry.campaign_id) if entry.campaign_id else None,
        "why": entry.why,
        "old": entry.old_json,
        "new": entry.new_json,
        "prev": entry.prev_hash,
    }
    return hashlib.sha256(canonical(body).encode()).hexdigest()


def values_of(obj: Any, *fields: str) -> dict[str, Any]:
    """A record's fields as a JSON-ready mapping (for old and new values)."""
    return {f: getattr(obj, f) for f in fields}


def store_id(session: Session) -> str:
    """This store's own id: the audit chain it writes to."""
    cached = session.info.get("testplan_store_id")
    if cached is None:
        row = session.get(StoreMeta, "store_id")
        assert row is not None, "store_meta has no store_id"
        cached = session.info["testplan_store_id"] = row.value
    return str(cached)


def _last(session: Session, chain: str) -> AuditEntry | None:
    return session.exec(
        select(AuditEntry)
        .where(AuditEntry.chain == chain)
        .order_by(col(AuditEntry.seq).desc())
        .limit(1)
    ).first()


def entry_of(session: Session, entity: str, entity_id: uuid.UUID) -> AuditEntry | None:
    """The (first) audit entry written for a record, if the trail still holds it."""
    return session.exec(
        select(AuditEntry).where(
            AuditEntry.entity == entity, AuditEntry.entity_id == str(entity_id)
        )
    ).first()


def append(
    session: Session,
    *,
    actor: str,
    action: str,
    entity: str,
    entity_id: uuid.UUID | str,
    campaign_id: uuid.UUID | None = None,
    why: str | None = None,
    old: dict[str, Any] | None = None,
    new: dict[str, Any] | None = None,
) -> AuditEntry:
    """Add one entry at the end of the chain, inside the caller's transaction.

    On PostgreSQL a transaction-scoped advisory lock makes appends from several benches
    queue; on SQLite ``BEGIN IMMEDIATE`` already serialises writers.
    """
    if session.get_bind().dialect.name == "postgresql":
        session.execute(sa.text("SELECT pg_advisory_xact_lock(hashtext('testplan.audit'))"))
    chain = store_id(session)
    last = _last(session, chain)
    entry = AuditEntry(
        chain=chain,
        seq=(last.seq + 1) if last else 1,
        at=utc_now(),
        actor=actor,
        action=action,
        entity=entity,
        entity_id=str(entity_id),
        campaign_id=campaign_id,
        why=why,
        old_json=canonical(old) if old is not None else None,
        new_json=canonical(new) if new is not None else None,
        prev_hash=last.hash if last else GENESIS,
        hash="",
    )
    entry.hash = entry_hash(entry)
    session.add(entry)
    session.flush()
    return entry


def head(session: Session) -> dict[str, Any]:
    """This store's audit-chain head: chain id, length (last sequence number) and hash."""
    chain = store_id(session)
    last = _last(session, chain)
    return {
        "chain": chain,
        "length": last.seq if last else 0,
        "hash": last.hash if last else GENESIS,
    }


def head_problem(session: Session, recorded: dict[str, Any]) -> str | None:
    """What is wrong with the chain against a head recorded earlier (None: it is there)."""
    if recorded["length"] == 0:
        return None
    entry = session.exec(
        select(AuditEntry).where(
            AuditEntry.chain == recorded["chain"], AuditEntry.seq == recorded["length"]
        )
    ).first()
    if entry is None:
        return f"the audit trail has no entry {recorded['length']} any more (its tail was cut)"
    if entry.hash != recorded["hash"]:
        return f"audit entry {recorded['length']} is not the one recorded (trail rewritten)"
    return None


@dataclass(frozen=True)
class Finding:
    """One integrity problem found by ``check_store``."""

    what: str
    where: str

    def line(self) -> str:
        return f"{self.where}: {self.what}"


def check_chain(session: Session) -> tuple[int, list[Finding]]:
    """Walk each chain (this store's, and any merged from benches) in order; return the
    number of entries and what does not check out."""
    findings: list[Finding] = []
    count = 0
    own = store_id(session)
    chains = sorted(set(session.exec(select(AuditEntry.chain)).all()))
    for chain in chains:
        prev = GENESIS
        expected_seq = 1
        name = "" if chain == own else f" of chain {chain[:8]}"
        for entry in session.exec(
            select(AuditEntry).where(AuditEntry.chain == chain).order_by(col(AuditEntry.seq))
        ):
            count += 1
            where = f"audit entry {entry.seq}{name} ({entry.action} {entry.entity})"
            if entry.seq != expected_seq:
                findings.append(
                    Finding(f"entries {expected_seq} to {entry.seq - 1} are missing", where)
                )
            if entry.prev_hash != prev:
                findings.append(
                    Finding("does not follow the entry before it (chain broken)", where)
                )
            if entry_hash(entry) != entry.hash:
                findings.append(Finding("content changed after it was recorded", where))
            prev = entry.hash
            expected_seq = entry.seq + 1
    return count, findings


def check_raw_files(session: Session) -> tuple[int, list[Finding]]:
    """Re-hash every raw file and the samples of every import."""
    from testplan.store.samples import check_blocks, digest_arrays

    findings: list[Finding] = []
    count = 0
    for raw in session.exec(select(RawFile).order_by(col(RawFile.imported_at))):
        count += 1
        where = f"raw file {raw.name} ({raw.id})"
        digest = content_sha256(raw.content, "it")
        if digest.startswith("wrongly typed"):
            findings.append(Finding(digest.removeprefix("wrongly typed: "), where))
        elif digest != raw.sha256:
            findings.append(Finding("content no longer matches its SHA-256", where))
        data, problems = check_blocks(session, raw.id)
        for p in problems:
            findings.append(
                Finding(
                    f"sample block {p.block + 1} (from sample {p.first_seq + 1}): {p.problem}",
                    where,
                )
            )
        if len(data) != raw.samples:
            findings.append(
                Finding(f"holds {len(data)} samples, {raw.samples} were imported", where)
            )
        elif digest_arrays(data.t_us, data.channel, data.value) != raw.samples_sha256:
            findings.append(Finding("samples changed since import", where))
    return count, findings


def check_attachments(session: Session) -> tuple[int, list[Finding]]:
    """Re-hash every stored photo or attachment."""
    from testplan.store.tables import Attachment

    findings = []
    count = 0
    for item in session.exec(select(Attachment)):
        count += 1
        digest = content_sha256(item.content, "it")
        if digest.startswith("wrongly typed"):
            findings.append(
                Finding(digest.removeprefix("wrongly typed: "), f"attachment {item.name}")
            )
        elif digest != item.sha256:
            findings.append(
                Finding("content no longer matches its SHA-256", f"attachment {item.name}")
            )
    return count, findings


def check_audited(session: Session) -> tuple[int, list[Finding]]:
    """Reconcile the records with the audit trail: every audited import still has its raw
    file, channels and samples with the audited hashes; every audited observation is still
    there as recorded, with its photo. Returns the number of audited records and what does
    not match (a change or deletion without an audit entry)."""
    from testplan.store.tables import Attachment, LoggerChannel, Observation

    findings: list[Finding] = []
    count = 0
    for entry in session.exec(
        select(AuditEntry).where(col(AuditEntry.action).in_(("data.import", "observation.add")))
    ):
        count += 1
        new = json.loads(entry.new_json or "{}")
        where = f"{entry.entity} {entry.entity_id} (audit entry {entry.seq}, {entry.action})"
        key = uuid.UUID(entry.entity_id)
        if entry.action == "data.import":
            raw = session.get(RawFile, key)
            if raw is None:
                findings.append(Finding("deleted without an audit entry", where))
                continue
            where = f"raw file {raw.name} of {new.get('run')}"
            for field in ("sha256", "samples", "samples_sha256"):
                if getattr(raw, field) != new.get(field):
                    findings.append(Finding(f"{field} differs from its audited value", where))
            channels = session.exec(
                select(sa.func.count())
                .select_from(LoggerChannel)
                .where(LoggerChannel.raw_file_id == raw.id)
            ).one()
            if int(channels) != len(new.get("channels", [])):
                findings.append(
                    Finding(
                        f"has {channels} channel(s), {len(new.get('channels', []))} audited",
                        where,
                    )
                )
            continue
        obs = session.get(Observation, key)
        if obs is None:
            findings.append(Finding("deleted without an audit entry", where))
            continue
        where = f"observation {obs.kind} in {new.get('run')}"
        if json.loads(obs.data_json) != new.get("data"):
            findings.append(Finding("content differs from its audited state", where))
        if new.get("attachment") and session.get(Attachment, uuid.UUID(new["attachment"])) is None:
            findings.append(Finding("its photo is gone", where))
    return count, findings
