"""The store's tables (SQLModel). The schema itself is made by the Alembic migrations in db/.

Conventions: UUID primary keys (stores from several benches merge without clashes),
timestamps are timezone-aware UTC (``UTCDateTime``), JSON is kept as canonical text so
it reads back byte for byte the same on SQLite and PostgreSQL. Logged samples use a
composite key (raw file, sequence number) and integer microseconds since the Unix
epoch (UTC), so a million rows go in by the bulk path.
"""

from __future__ import annotations

import datetime as dt
import uuid
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Dialect
from sqlmodel import Field, SQLModel


class UTCDateTime(sa.types.TypeDecorator[dt.datetime]):
    """A timestamp stored in UTC and always read back timezone-aware.

    SQLite keeps no zone, so values are normalised to UTC on the way in and tagged
    UTC on the way out; naive datetimes are refused rather than guessed.
    """

    impl = sa.DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value: Any, dialect: Dialect) -> dt.datetime | None:
        if value is None:
            return None
        if not isinstance(value, dt.datetime) or value.tzinfo is None:
            raise ValueError(f"naive or non-datetime timestamp {value!r}; give a time zone")
        utc = value.astimezone(dt.UTC)
        return utc.replace(tzinfo=None) if dialect.name == "sqlite" else utc

    def process_result_value(self, value: Any, dialect: Dialect) -> dt.datetime | None:
        if value is None:
            return None
        assert isinstance(value, dt.datetime)
        if value.tzinfo is None:
            return value.replace(tzinfo=dt.UTC)
        return value.astimezone(dt.UTC)


def utc_now() -> dt.datetime:
    """Now, timezone-aware UTC, to the microsecond."""
    return dt.datetime.now(dt.UTC)


def _id() -> uuid.UUID:
    return uuid.uuid4()


# --- registers -------------------------------------------------------------------------


class Person(SQLModel, table=True):
    __tablename__ = "person"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    initials: str = Field(unique=True, max_length=16)
    name: str
    public_key: str | None = None
    title: str | None = Field(default=None, max_length=120)  # identity.NAME_LIMIT
    created_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class RoleGrant(SQLModel, table=True):
    """One grant or withdrawal of a role, dated, with its reason, signed by a manager's key
    (the founding grant of a store's first manager is the one unsigned grant). Append-only:
    the roles in force at a time are the last act for each role at or before it."""

    __tablename__ = "role_grant"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    person_id: uuid.UUID = Field(foreign_key="person.id", index=True)
    role: str = Field(max_length=16)
    action: str = Field(max_length=16)  # grant, withdraw
    at: dt.datetime = Field(sa_type=UTCDateTime)
    reason: str
    by_person_id: uuid.UUID | None = Field(default=None, foreign_key="person.id")
    by_key_id: uuid.UUID | None = Field(default=None, foreign_key="person_key.id")
    signature: str | None = Field(default=None, max_length=128)


class Equipment(SQLModel, table=True):
    __tablename__ = "equipment"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    tag: str = Field(unique=True, max_length=64)
    description: str
    maker: str | None = None
    model: str | None = None
    serial: str | None = None
    created_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class Calibration(SQLModel, table=True):
    """One calibration of one measured channel of an instrument."""

    __tablename__ = "calibration"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    equipment_id: uuid.UUID = Field(foreign_key="equipment.id", index=True)
    channel: str = Field(max_length=64)
    unit: str = Field(max_length=32)
    certificate: str
    provider: str
    calibrated_on: dt.date
    due_on: dt.date
    gain: float = 1.0
    offset: float = 0.0
    uncertainty: float
    coverage_k: float
    range_min: float | None = None
    range_max: float | None = None
    created_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class StoreMeta(SQLModel, table=True):
    """Facts about this store itself: ``store_id`` names its own audit chain."""

    __tablename__ = "store_meta"
    key: str = Field(primary_key=True, max_length=32)
    value: str


# --- campaigns and plans ---------------------------------------------------------------


class CampaignRecord(SQLModel, table=True):
    __tablename__ = "campaign"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    reference: str = Field(unique=True, max_length=64)
    title: str
    client: str
    laboratory: str
    location: str | None = None
    created_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class PlanRevision(SQLModel, table=True):
    __tablename__ = "plan_revision"
    __table_args__ = (sa.UniqueConstraint("campaign_id", "number"),)
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    campaign_id: uuid.UUID = Field(foreign_key="campaign.id", index=True)
    number: int
    source_name: str
    source_sha256: str = Field(max_length=64)
    source_text: str = Field(sa_type=sa.Text)
    plan_json: str = Field(sa_type=sa.Text)
    plan_sha256: str = Field(max_length=64)
    reason: str | None = None
    created_by: str
    created_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class ProcedureRecord(SQLModel, table=True):
    __tablename__ = "procedure"
    __table_args__ = (sa.UniqueConstraint("revision_id", "key"),)
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    revision_id: uuid.UUID = Field(foreign_key="plan_revision.id", index=True)
    key: str = Field(max_length=64)
    family: str
    code: str
    title: str
    standard: str
    edition: str
    clause: str
    status: str
    duration_h: float
    body_json: str = Field(sa_type=sa.Text)


class CriterionRecord(SQLModel, table=True):
    __tablename__ = "criterion"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    procedure_id: uuid.UUID = Field(foreign_key="procedure.id", index=True)
    key: str = Field(max_length=128)
    quantity: str
    comparison: str
    evaluated: str
    unit: str | None = None
    min: float | None = None
    max: float | None = None
    text: str | None = None


class SpecimenRecord(SQLModel, table=True):
    __tablename__ = "specimen"
    __table_args__ = (sa.UniqueConstraint("campaign_id", "serial"),)
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    campaign_id: uuid.UUID = Field(foreign_key="campaign.id", index=True)
    serial: str = Field(max_length=64)
    leg: str
    received_on: dt.date | None = None
    receipt_condition: str | None = None


class RunRecord(SQLModel, table=True):
    """One planned run, and what happened at the bench."""

    __tablename__ = "run"
    __table_args__ = (sa.UniqueConstraint("campaign_id", "key"),)
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    campaign_id: uuid.UUID = Field(foreign_key="campaign.id", index=True)
    revision_id: uuid.UUID = Field(foreign_key="plan_revision.id")
    key: str = Field(max_length=160)
    procedure_key: str = Field(max_length=64)
    leg: str
    facility: str | None = None
    planned_start: dt.datetime = Field(sa_type=UTCDateTime)
    planned_end: dt.datetime = Field(sa_type=UTCDateTime)
    state: str = Field(default="planned", max_length=16)
    operator_id: uuid.UUID | None = Field(default=None, foreign_key="person.id")
    started_at: dt.datetime | None = Field(default=None, sa_type=UTCDateTime)
    ambient_temperature_c: float | None = None
    ambient_humidity_pct: float | None = None
    ambient_pressure_hpa: float | None = None
    preconditioning: str | None = None
    specimen_state_json: str | None = Field(default=None, sa_type=sa.Text)
    finished_at: dt.datetime | None = Field(default=None, sa_type=UTCDateTime)
    finish_note: str | None = None
    checker_id: uuid.UUID | None = Field(default=None, foreign_key="person.id")
    checked_at: dt.datetime | None = Field(default=None, sa_type=UTCDateTime)
    check_note: str | None = None
    check_key_id: uuid.UUID | None = None  # the checker's person_key
    check_signature: str | None = Field(default=None, max_length=128)
    external_provider: str | None = None
    invalid_reason: str | None = Field(default=None, max_length=2000)  # identity.TEXT_LIMIT
    repeat_of_id: uuid.UUID | None = None  # the invalid run this one repeats


class RunSpecimen(SQLModel, table=True):
    __tablename__ = "run_specimen"
    run_id: uuid.UUID = Field(foreign_key="run.id", primary_key=True)
    specimen_id: uuid.UUID = Field(foreign_key="specimen.id", primary_key=True)


class RunEquipment(SQLModel, table=True):
    """An instrument used on a run, with the calibration in force for each channel."""

    __tablename__ = "run_equipment"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    run_id: uuid.UUID = Field(foreign_key="run.id", index=True)
    equipment_id: uuid.UUID = Field(foreign_key="equipment.id")
    calibration_id: uuid.UUID = Field(foreign_key="calibration.id")


class Deviation(SQLModel, table=True):
    __tablename__ = "deviation"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    run_id: uuid.UUID = Field(foreign_key="run.id", index=True)
    description: str
    reason: str
    approved_by_id: uuid.UUID = Field(foreign_key="person.id")
    recorded_by_id: uuid.UUID = Field(foreign_key="person.id")
    recorded_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)
    approval_key_id: uuid.UUID | None = None  # the approver's person_key
    approval_signature: str | None = Field(default=None, max_length=128)
    criterion_key: str | None = Field(default=None, max_length=64)


class AuditEntry(SQLModel, table=True):
    """One append-only audit entry, hash-chained to the one before it."""

    __tablename__ = "audit"
    __table_args__ = (sa.UniqueConstraint("chain", "seq"),)
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    chain: str = Field(max_length=36, index=True)
    seq: int
    at: dt.datetime = Field(sa_type=UTCDateTime)
    actor: str
    action: str = Field(max_length=64)
    entity: str = Field(max_length=64)
    entity_id: str = Field(max_length=64)
    campaign_id: uuid.UUID | None = Field(default=None, index=True)
    why: str | None = None
    old_json: str | None = Field(default=None, sa_type=sa.Text)
    new_json: str | None = Field(default=None, sa_type=sa.Text)
    prev_hash: str = Field(max_length=64)
    hash: str = Field(max_length=64)


# --- logged data and observations (migration 0002) --------------------------------------


class RawFile(SQLModel, table=True):
    """A logger file exactly as received, with how it was read."""

    __tablename__ = "raw_file"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    run_id: uuid.UUID = Field(foreign_key="run.id", index=True)
    name: str
    sha256: str = Field(max_length=64)
    size: int
    content: bytes = Field(sa_type=sa.LargeBinary)
    layout: str = Field(max_length=8)
    timezone: str
    read_options_json: str = Field(sa_type=sa.Text)
    tool_version: str
    operator_id: uuid.UUID = Field(foreign_key="person.id")
    imported_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)
    samples: int
    first_at: dt.datetime = Field(sa_type=UTCDateTime)
    last_at: dt.datetime = Field(sa_type=UTCDateTime)
    samples_sha256: str = Field(max_length=64)
    # a withdrawn import stays in the store and the audit trail; judging ignores it
    withdrawn_at: dt.datetime | None = Field(default=None, sa_type=UTCDateTime)
    withdrawn_by: str | None = None
    withdrawn_why: str | None = None


class LoggerChannel(SQLModel, table=True):
    """One mapped channel of a raw file: source column, plan quantity, conversion, instrument."""

    __tablename__ = "logger_channel"
    __table_args__ = (sa.UniqueConstraint("raw_file_id", "number"),)
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    raw_file_id: uuid.UUID = Field(foreign_key="raw_file.id", index=True)
    number: int
    quantity: str
    source: str
    source_unit: str
    unit: str
    scale: float
    offset: float
    equipment_id: uuid.UUID | None = Field(default=None, foreign_key="equipment.id")
    calibration_id: uuid.UUID | None = Field(default=None, foreign_key="calibration.id")
    specimen_id: uuid.UUID | None = Field(default=None, foreign_key="specimen.id")


class SampleBlock(SQLModel, table=True):
    """A block of up to 65,536 logged values of one import, as little-endian arrays.
    Written and read only by store/samples.py."""

    __tablename__ = "sample_block"
    raw_file_id: uuid.UUID = Field(foreign_key="raw_file.id", primary_key=True)
    block: int = Field(primary_key=True, sa_column_kwargs={"autoincrement": False})
    first_seq: int = Field(sa_type=sa.BigInteger)
    n: int
    t_us: bytes = Field(sa_type=sa.LargeBinary)
    channel: bytes = Field(sa_type=sa.LargeBinary)
    value: bytes = Field(sa_type=sa.LargeBinary)
    sha256: str = Field(max_length=64)


class Attachment(SQLModel, table=True):
    """A photo or other file, stored once by its SHA-256."""

    __tablename__ = "attachment"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    sha256: str = Field(unique=True, max_length=64)
    name: str
    media_type: str
    size: int
    content: bytes = Field(sa_type=sa.LargeBinary)


class Observation(SQLModel, table=True):
    """An observation at the bench: ingress, mass, leak test, function, insulation, rating..."""

    __tablename__ = "observation"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    run_id: uuid.UUID = Field(foreign_key="run.id", index=True)
    specimen_id: uuid.UUID | None = Field(default=None, foreign_key="specimen.id")
    kind: str = Field(max_length=32)
    checkpoint: str | None = None
    data_json: str = Field(sa_type=sa.Text)
    attachment_id: uuid.UUID | None = Field(default=None, foreign_key="attachment.id")
    recorded_by_id: uuid.UUID = Field(foreign_key="person.id")
    recorded_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


CORE_TABLES = (
    "person",
    "person_role",
    "equipment",
    "calibration",
    "campaign",
    "plan_revision",
    "procedure",
    "criterion",
    "specimen",
    "run",
    "run_specimen",
    "run_equipment",
    "deviation",
    "audit",
)


# --- judging (migration 0003) -----------------------------------------------------------


class Judgement(SQLModel, table=True):
    """One judging of a run: the rule, the tool, a hash of every input, the run's outcome."""

    __tablename__ = "judgement"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    run_id: uuid.UUID = Field(foreign_key="run.id", index=True)
    revision_id: uuid.UUID = Field(foreign_key="plan_revision.id")
    rule: str = Field(max_length=16)
    guard_factor: float
    rule_agreement: str | None = None
    outcome: str = Field(max_length=24)
    interpretation_json: str | None = Field(default=None, sa_type=sa.Text)
    tool_version: str
    inputs_sha256: str = Field(max_length=64)
    judged_by: str
    judged_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class VerdictRecord(SQLModel, table=True):
    """One criterion's verdict within a judgement."""

    __tablename__ = "verdict"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    judgement_id: uuid.UUID = Field(foreign_key="judgement.id", index=True)
    criterion_key: str = Field(max_length=128)
    quantity: str
    specimen_id: uuid.UUID | None = Field(default=None, foreign_key="specimen.id")
    outcome: str = Field(max_length=24)
    measured: float | None = None
    unit: str | None = None
    limit_min: float | None = None
    limit_max: float | None = None
    accept_min: float | None = None
    accept_max: float | None = None
    margin: float | None = None
    uncertainty: float | None = None
    coverage_k: float | None = None
    window_start: dt.datetime | None = Field(default=None, sa_type=UTCDateTime)
    window_end: dt.datetime | None = Field(default=None, sa_type=UTCDateTime)
    detail: str = Field(sa_type=sa.Text)
    flags_json: str = Field(sa_type=sa.Text)
    inputs_sha256: str = Field(max_length=64)


# --- sign-off (migration 0005) ----------------------------------------------------------


class PersonKey(SQLModel, table=True):
    """A public signing key (Ed25519, raw bytes in base64) registered for a person."""

    __tablename__ = "person_key"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    person_id: uuid.UUID = Field(foreign_key="person.id", index=True)
    public_key: str = Field(max_length=64)
    fingerprint: str = Field(unique=True, max_length=64)
    registered_by: str
    registered_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)
    proof: str | None = Field(default=None, max_length=128)
    enrolled_by_key_id: uuid.UUID | None = None  # the manager's key that countersigned
    enrolment_signature: str | None = Field(default=None, max_length=128)


class KeyRevocation(SQLModel, table=True):
    """A key withdrawn from a stated time, with the reason, signed by a manager's key."""

    __tablename__ = "key_revocation"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    key_id: uuid.UUID = Field(foreign_key="person_key.id", index=True)
    effective_at: dt.datetime = Field(sa_type=UTCDateTime)
    reason: str
    by_person_id: uuid.UUID = Field(foreign_key="person.id")
    by_key_id: uuid.UUID = Field(foreign_key="person_key.id")
    signature: str = Field(max_length=128)
    recorded_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class Manifest(SQLModel, table=True):
    """The campaign's records as signed: every item's hash, and the root over them."""

    __tablename__ = "manifest"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    campaign_id: uuid.UUID = Field(foreign_key="campaign.id", index=True)
    root: str = Field(max_length=64)
    body_json: str = Field(sa_type=sa.Text)
    created_by: str
    created_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class Signature(SQLModel, table=True):
    """One sign-off of a manifest: role, person, key and the Ed25519 signature."""

    __tablename__ = "signature"
    __table_args__ = (sa.UniqueConstraint("manifest_id", "role"),)
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    manifest_id: uuid.UUID = Field(foreign_key="manifest.id", index=True)
    role: str = Field(max_length=16)
    person_id: uuid.UUID = Field(foreign_key="person.id")
    key_id: uuid.UUID = Field(foreign_key="person_key.id")
    signed_at: dt.datetime = Field(sa_type=UTCDateTime)
    signature: str = Field(max_length=128)
    context_json: str | None = Field(default=None, sa_type=sa.Text)  # migration 0014


class Amendment(SQLModel, table=True):
    """An approved campaign reopened for change: why, by whom, and what it supersedes."""

    __tablename__ = "amendment"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    campaign_id: uuid.UUID = Field(foreign_key="campaign.id", index=True)
    supersedes_manifest_id: uuid.UUID = Field(foreign_key="manifest.id")
    reason: str
    requested_by: str
    at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class ReportIssue(SQLModel, table=True):
    """A PDF issued for an approved manifest, by its SHA-256, signed by who issued it."""

    __tablename__ = "report_issue"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    campaign_id: uuid.UUID = Field(foreign_key="campaign.id", index=True)
    manifest_id: uuid.UUID = Field(foreign_key="manifest.id")
    report_number: str
    revision: int
    pdf_sha256: str = Field(unique=True, max_length=64)
    issued_by: str
    issued_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)
    issue_date: dt.date | None = None  # migration 0014
    person_id: uuid.UUID | None = None  # migration 0017: who issued it, signed
    key_id: uuid.UUID | None = None
    signature: str | None = Field(default=None, max_length=128)
    base_sha256: str | None = Field(default=None, max_length=64)


# --- bench page logins (migration 0013) -------------------------------------------------


class TemplateSet(SQLModel, table=True):
    """A lab's own report template set, registered once by a manager: its SHA-256
    (`report.render.templates_sha256`), a name, and the manager's signature. Append-only."""

    __tablename__ = "template_set"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    sha256: str = Field(unique=True, max_length=64)
    name: str = Field(max_length=120)
    person_id: uuid.UUID = Field(foreign_key="person.id")
    key_id: uuid.UUID = Field(foreign_key="person_key.id")
    at: dt.datetime = Field(sa_type=UTCDateTime)
    signature: str = Field(max_length=128)


class PersonPassword(SQLModel, table=True):
    """A person's bench-page password as an argon2id hash (never the password itself)."""

    __tablename__ = "person_password"
    person_id: uuid.UUID = Field(foreign_key="person.id", primary_key=True)
    hash: str
    set_by: str
    set_at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


class LoginFailure(SQLModel, table=True):
    """A failed bench-page login, kept so back-off holds across restarts and servers."""

    __tablename__ = "login_failure"
    id: uuid.UUID = Field(default_factory=_id, primary_key=True)
    initials: str = Field(index=True, max_length=16)
    at: dt.datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)


import testplan.store.limits  # noqa: E402, F401  (length limits before every flush)
