"""Store fixtures: every store test runs on a real SQLite file and, when a server is
given in TESTPLAN_TEST_PG_URL (.ci/run starts one), on a fresh PostgreSQL database."""

from __future__ import annotations

import contextlib
import datetime as dt
import os
import uuid
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

import pytest
import sqlalchemy as sa
from sqlalchemy.engine import make_url
from typer.testing import CliRunner

from testplan.cli import app

SAMPLE = Path(__file__).resolve().parents[2] / "sample_campaign" / "flood-gauge-node.toml"
PHOTO = Path(__file__).resolve().parents[1] / "data" / "photos" / "gland-after-immersion.png"
PG_URL = os.environ.get("TESTPLAN_TEST_PG_URL")
PASS = "a demo passphrase"
MANAGER = "QM"
NO_PG = "no PostgreSQL server given: set TESTPLAN_TEST_PG_URL (.ci/run starts a throwaway one)"


def fresh_postgres_database() -> tuple[str, sa.Engine, str]:
    assert PG_URL is not None
    name = "tp_" + uuid.uuid4().hex[:16]
    admin = sa.create_engine(PG_URL, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.exec_driver_sql(f'CREATE DATABASE "{name}"')
    url = make_url(PG_URL).set(database=name).render_as_string(hide_password=False)
    return url, admin, name


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def db_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """A URL for an empty store: an SQLite file in tmp_path, or a new PostgreSQL database."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'lab.db'}"
        return
    if not PG_URL:
        pytest.skip(NO_PG)
    url, admin, name = fresh_postgres_database()
    try:
        yield url
    finally:
        with admin.connect() as conn:
            conn.exec_driver_sql(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        admin.dispose()


@dataclass(frozen=True)
class Roles:
    """The two-role set-up on a PostgreSQL store: the owner runs migrations, the bench role
    (given its privileges by `store grant-bench`) does everyday work."""

    owner: str  # URL as the owner role
    bench: str  # URL as the bench role
    bench_role: str


def owned_by_roles(url: str) -> tuple[Roles, Callable[[], None]]:
    """Make ``url``'s empty database owned by a new owner role (no superuser), with a new
    bench role beside it. Returns the roles and a clean-up that drops the database and
    both roles. `store grant-bench` is left to the caller, once the owner made the store."""
    assert PG_URL is not None
    tag = uuid.uuid4().hex[:8]
    owner, bench = f"tp_owner_{tag}", f"tp_bench_{tag}"
    name = make_url(url).database
    admin = sa.create_engine(PG_URL, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.exec_driver_sql(f"CREATE ROLE {owner} LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE")
        conn.exec_driver_sql(f"CREATE ROLE {bench} LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE")
        conn.exec_driver_sql(f'ALTER DATABASE "{name}" OWNER TO {owner}')

    def as_role(role: str) -> str:
        return make_url(url).set(username=role, password=None).render_as_string(False)

    def drop() -> None:
        with admin.connect() as conn:
            conn.exec_driver_sql(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
            conn.exec_driver_sql(f"DROP ROLE IF EXISTS {bench}")
            conn.exec_driver_sql(f"DROP ROLE IF EXISTS {owner}")
        admin.dispose()

    return Roles(as_role(owner), as_role(bench), bench), drop


class Bench:
    """Runs testplan commands against one store, as a person at the bench would."""

    def __init__(self, url: str, folder: Path) -> None:
        self.url = url
        self.folder = folder
        self.runner = CliRunner(env={"TESTPLAN_KEY_PASSPHRASE": PASS})

    def __call__(self, *args: str, ok: bool = True):  # type: ignore[no-untyped-def]
        result = self.runner.invoke(app, [*args, "--db", self.url])
        if ok:
            assert result.exit_code == 0, (args, result.stdout, result.stderr, result.exception)
        return result

    def plain(self, *args: str):  # type: ignore[no-untyped-def]
        """A command that takes no store (keys new, plan)."""
        result = self.runner.invoke(app, list(args))
        assert result.exit_code == 0, (args, result.stdout, result.stderr, result.exception)
        return result

    def fail(self, *args: str, code: int = 1, db: bool = True) -> str:
        """Run a command that must be refused; return its one error line."""
        result = self(*args, ok=False) if db else self.runner.invoke(app, list(args))
        assert result.exit_code == code, (args, result.stdout, result.stderr, result.exception)
        assert result.exception is None or isinstance(result.exception, SystemExit)
        assert "Traceback" not in result.stderr
        lines = [ln for ln in result.stderr.splitlines() if ln.startswith("error:")]
        assert len(lines) == 1, result.stderr
        return lines[0]

    def sql(self, statement: str, **params: object) -> list[sa.Row]:  # type: ignore[type-arg]
        """Read the store directly (what a reviewer with a database client would see)."""
        engine = sa.create_engine(self.url)
        try:
            with engine.connect() as conn:
                return list(conn.execute(sa.text(statement), params).all())
        finally:
            engine.dispose()

    def samples(self) -> list[tuple[str, int, float]]:
        """Every stored sample as (quantity, t_us, value), import by import in sequence
        order, decoded from the blocks without the tool's reader."""
        import numpy as np

        channels = {
            (str(f), n): q
            for f, n, q in self.sql("SELECT raw_file_id, number, quantity FROM logger_channel")
        }
        out = []
        for f, t, c, v in self.sql(
            "SELECT b.raw_file_id, b.t_us, b.channel, b.value FROM sample_block b "
            "JOIN raw_file r ON r.id = b.raw_file_id ORDER BY r.imported_at, b.block"
        ):
            for ti, ci, vi in zip(
                np.frombuffer(t, "<i8").tolist(),
                np.frombuffer(c, "<i4").tolist(),
                np.frombuffer(v, "<f8").tolist(),
                strict=True,
            ):
                out.append((channels[(str(f), ci)], ti, vi))
        return out

    def sample_count(self) -> int:
        return int(self.sql("SELECT coalesce(sum(n), 0) FROM sample_block")[0][0])

    def raw(self, statement: str, **params: object) -> None:
        """Change the store behind the tool's back (tamper tests)."""
        engine = sa.create_engine(self.url)
        try:
            with engine.begin() as conn:
                conn.execute(sa.text(statement), params)
        finally:
            engine.dispose()

    def tamper(self, statement: str, **params: object) -> None:
        """Change the store as someone holding the SQLite file would: drop the lock
        triggers, make the change, put the triggers back. On PostgreSQL a plain ``raw``
        (the database user cannot drop the triggers it does not own)."""
        with self.file_holder() as conn:
            conn.execute(sa.text(statement), params)

    @contextlib.contextmanager
    def file_holder(self) -> Iterator[sa.Connection]:
        """A plain connection in one transaction; on SQLite with the lock triggers dropped
        for its length and put back at its end, as someone holding the file can."""
        engine = sa.create_engine(self.url)
        try:
            with engine.begin() as conn:
                triggers = (
                    conn.exec_driver_sql(
                        "SELECT name, sql FROM sqlite_master WHERE type = 'trigger'"
                    ).all()
                    if self.url.startswith("sqlite")
                    else []
                )
                for name, _ in triggers:
                    conn.exec_driver_sql(f'DROP TRIGGER "{name}"')
                yield conn
                for _, text in triggers:
                    conn.exec_driver_sql(text)
        finally:
            engine.dispose()

    def key(self, who: str) -> str:
        """The private key file of ``who`` (made by ``enrol``)."""
        return str(self.folder / f"{who}.pem")

    def signed(self, who: str) -> tuple[str, ...]:
        """``--by WHO --key WHO.pem``: an act signed by ``who``."""
        return ("--by", who, "--key", self.key(who))

    def enrol(self, who: str, by: str = MANAGER) -> None:
        """Make ``who`` a key pair and have the manager ``by`` enrol it."""
        if not Path(self.key(who)).exists():
            self.plain("keys", "new", who, "--out", self.key(who))
        self(
            "keys", "register", who, "--public", self.key(who) + ".pub", *self.signed(by), "--quiet"
        )

    def found(self) -> None:
        """The store's founding manager QM, with an enrolled key."""
        self("people", "add", MANAGER, "--name", "Quinn Marsh", "--role", "manager", "--quiet")
        self.plain("keys", "new", MANAGER, "--out", self.key(MANAGER))
        self("keys", "register", MANAGER, "--public", self.key(MANAGER) + ".pub",
             *self.signed(MANAGER), "--quiet")  # fmt: skip

    def add(self, who: str, name: str, *roles: str) -> None:
        """Register ``who`` with ``roles``, added and signed by the manager."""
        flags = [x for r in roles for x in ("--role", r)]
        self("people", "add", who, "--name", name, *flags, *self.signed(MANAGER), "--quiet")

    def write(self, name: str, text: str) -> Path:
        path = self.folder / name
        path.write_text(text, encoding="utf-8")
        return path


START = (
    "--operator",
    "AK",
    "--equipment",
    "LT-03",
    "--ambient-temperature",
    "21 degC",
    "--ambient-humidity",
    "45 %",
    "--ambient-pressure",
    "1012 hPa",
    "--state-ok",
)


@pytest.fixture
def bench(db_url: str, tmp_path: Path) -> Bench:
    """A store holding the sample campaign, three people and one calibrated instrument."""
    return stock(Bench(db_url, tmp_path))


def stock(b: Bench) -> Bench:
    """Fill an empty store with the sample campaign, three people and LT-03."""
    b("init", str(SAMPLE), "--quiet")
    b.found()
    b.add("AK", "Anna Kowal", "operator")
    b.add("MO", "Mark Osei", "checker", "approver")
    b.add("JT", "Jo Tran", "operator", "checker")
    for who in ("MO", "JT"):
        b.enrol(who)
    b(
        "equipment",
        "add",
        "LT-03",
        "--description",
        "level and temperature transmitter",
        "--serial",
        "88213",
        "--by",
        "AK",
        "--quiet",
    )
    for channel, u, rng in (
        ("lowest_point_depth", "4 mm", ("0 mm", "3000 mm")),
        ("water_temperature", "0.3 K", ("0 degC", "40 degC")),
    ):
        b(
            "equipment",
            "calibrate",
            "LT-03",
            "--channel",
            channel,
            "--certificate",
            "VC-2026-118",
            "--provider",
            "Gellimoor Calibration Ltd",
            "--calibrated",
            "2026-06-01",
            "--due",
            "2027-06-01",
            "--uncertainty",
            u,
            "--range",
            *rng,
            "--by",
            "AK",
            "--quiet",
        )
    return b


RUN = "water-8@ip-verification-1"


def record_and_judge(
    bench: Bench, *, deviation: bool = False, until_finished: bool = False, photo: bool = False
) -> Bench:
    """One run recorded, checked and judged; RP, LV, MO hold enrolled keys (the key
    passphrase comes from $TESTPLAN_KEY_PASSPHRASE, set to PASS by the Bench). With
    ``deviation`` the run also carries an approved deviation; with ``until_finished`` the
    run is left finished, neither checked nor judged; with ``photo`` the ingress
    observation carries a photo."""
    bench.add("RP", "Rita Pereira", "preparer")
    bench.add("LV", "Lars Vik", "reviewer", "preparer")
    for who in ("RP", "LV"):
        bench.enrol(who)
    bench("record", "start", RUN, *START, "--at", "2027-01-12T16:05Z", "--quiet")
    t0 = dt.datetime(2027, 1, 12, 16, 5, tzinfo=dt.UTC)
    rows = ["time,depth"] + [
        f"{t0 + dt.timedelta(minutes=m):%Y-%m-%dT%H:%M:%SZ},2100" for m in range(4400)
    ]
    tank = bench.write("tank.csv", "\n".join(rows) + "\n")
    bench(
        "record",
        "import",
        RUN,
        str(tank),
        "--map",
        "depth[mm]=lowest_point_depth@LT-03",
        "--by",
        "AK",
        "--quiet",
    )
    bench(
        "record",
        "observe",
        RUN,
        "--specimen",
        "QC-2027-014-S01",
        "--ingress",
        "water:none",
        *(("--photo", str(PHOTO)) if photo else ()),
        "--by",
        "AK",
        "--quiet",
    )
    # The specimen temperature is not logged here, so its condition has no data: an approved
    # deviation must cover it before the data check.
    description, reason = (
        ("tank topped up for 3 min", "slow leak at the tank valve")
        if deviation
        else ("specimen temperature not logged", "surface thermometer away for repair")
    )
    bench(
        *("record", "deviation", RUN, "--description", description, "--reason", reason),
        *("--approved-by", "MO", "--key", bench.key("MO"), "--by", "AK"),
        *("--covers", "water-8.temperature", "--quiet"),
    )
    bench("record", "finish", RUN, "--by", "AK", "--at", "2027-01-15T17:30Z", "--quiet")
    if until_finished:
        return bench
    bench("record", "check", RUN, *bench.signed("MO"), "--at", "2027-01-16T09:00Z", "--quiet")
    bench("judge", "--quiet", ok=False)
    return bench


# Sign-off after the fixtures' data checks (2027-01-16), in role order.
SIGNED_AT = {
    "prepared": "2027-01-20T10:00Z",
    "reviewed": "2027-01-20T11:00Z",
    "approved": "2027-01-20T12:00Z",
}


def sign(b: Bench, role: str, who: str, key: str | None = None) -> list[str]:
    return [
        "sign",
        "QC-2027-014",
        "--role",
        role,
        "--as",
        who,
        "--key",
        str(b.folder / f"{key or who}.pem"),
        *(["--at", SIGNED_AT[role]] if role in SIGNED_AT else []),
    ]


def issue(b: Bench, pdf: Path, *more: str, by: str = "MO") -> None:
    """``testplan report`` of the approved campaign, issued by ``by``."""
    b("report", "QC-2027-014", "-o", str(pdf), "--issue-date", "2027-02-01", *b.signed(by),
      *more, "--quiet")  # fmt: skip


def approve_and_issue(b: Bench, name: str = "report.pdf") -> Path:
    b(*sign(b, "prepared", "RP"), "--quiet")
    b(*sign(b, "reviewed", "LV"), "--quiet")
    b(*sign(b, "approved", "MO"), "--quiet")
    pdf = b.folder / name
    issue(b, pdf)
    return pdf


@pytest.fixture
def bench_role(db_url: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[Bench]:
    """PostgreSQL only: the store made by its owner role (no superuser), the campaign
    recorded, approved and issued as a bench role set up by `store grant-bench`."""
    if not db_url.startswith("postgresql"):
        pytest.skip("roles are a PostgreSQL matter")
    monkeypatch.setenv("TESTPLAN_KEY_PASSPHRASE", PASS)
    roles, drop = owned_by_roles(db_url)
    try:
        owner = stock(Bench(roles.owner, tmp_path))
        result = owner("store", "grant-bench", roles.bench_role)
        assert result.stdout.startswith(f"{roles.bench_role}: bench privileges granted")
        b = Bench(roles.bench, tmp_path)
        record_and_judge(b, photo=True)
        approve_and_issue(b)
        yield b
    finally:
        drop()
