"""A CLI-recorded twin of the bench-page run, and the comparison of two stores."""

from __future__ import annotations

import re

from tests.store.conftest import START, Bench
from tests.web.conftest import DATA, RUN

INGRESS = {"where": "behind the cable gland"}


# The conditions the six-reading log leaves failed, each covered by an approved deviation
# before the data check (in the order the check names them).
COVERED = ("water-8.duration", "water-8.temperature")
COVERED_WHY = ("short demonstration log", "bench page trial run")


def record_twin(twin: Bench) -> None:
    """What the bench page's whole run does, done with the CLI."""
    photo = twin.folder / "gland.png"
    photo.write_bytes((DATA / "photos" / "gland-after-immersion.png").read_bytes())
    logger = twin.folder / "tank-long.csv"
    logger.write_bytes((DATA / "loggers" / "tank-long.csv").read_bytes())
    twin("record", "start", RUN, *START, "--quiet")
    twin(
        "record",
        "import",
        RUN,
        str(logger),
        "--map",
        "level[cm]=lowest_point_depth@LT-03",
        "--map",
        "water[degC]=water_temperature@LT-03",
        "--by",
        "AK",
        "--quiet",
    )
    twin(
        "record",
        "observe",
        RUN,
        "--ingress",
        "water:found",
        "--where",
        INGRESS["where"],
        "--photo",
        str(photo),
        "--by",
        "AK",
        "--quiet",
    )
    twin("record", "finish", RUN, "--by", "AK", "--quiet")
    for criterion in COVERED:
        twin(
            *("record", "deviation", RUN, "--description", COVERED_WHY[0]),
            *("--reason", COVERED_WHY[1], "--covers", criterion),
            *("--approved-by", "MO", "--key", twin.key("MO"), "--by", "JT", "--quiet"),
        )
    twin("record", "check", RUN, *twin.signed("JT"), "--quiet")


# What the two stores must hold alike: every recorded value but ids and clock times.
SAME = {
    "run": "SELECT r.key, r.state, r.ambient_temperature_c, r.ambient_humidity_pct, "
    "r.ambient_pressure_hpa, r.preconditioning, r.specimen_state_json, r.finish_note, "
    "r.check_note, o.initials, c.initials FROM run r LEFT JOIN person o ON o.id = r.operator_id "
    "LEFT JOIN person c ON c.id = r.checker_id ORDER BY r.key",
    "equipment": "SELECT c.certificate, c.channel FROM run_equipment e JOIN calibration c "
    "ON c.id = e.calibration_id ORDER BY c.channel",
    # the first and last times are in samples_sha256 (drivers return them as different types)
    "raw_file": "SELECT name, sha256, size, layout, timezone, read_options_json, samples, "
    "samples_sha256 FROM raw_file",
    "channels": 'SELECT number, quantity, source, source_unit, unit, scale, "offset" '
    "FROM logger_channel ORDER BY number",
    "blocks": "SELECT block, n, sha256 FROM sample_block ORDER BY block",
    "observations": "SELECT o.kind, o.data_json, o.checkpoint, a.sha256, a.name, a.media_type "
    "FROM observation o LEFT JOIN attachment a ON a.id = o.attachment_id ORDER BY o.kind",
    "deviations": "SELECT d.description, d.reason, d.criterion_key, a.initials, b.initials "
    "FROM deviation d JOIN person a ON a.id = d.approved_by_id "
    "JOIN person b ON b.id = d.recorded_by_id ORDER BY d.criterion_key",
    "audit": "SELECT action, actor, entity FROM audit ORDER BY chain, seq",
}
SIGNED_ACTOR = re.compile(r"(\S+) key ([0-9a-f]+)")


def _actor(bench: Bench, actor: str) -> str:
    """A signed act's actor ``INITIALS key FINGERPRINT`` as ``INITIALS key <own key>`` when
    the fingerprint is of a key enrolled for that person in this store (each store has its
    own key pairs); any other actor as it is."""
    found = SIGNED_ACTOR.fullmatch(actor)
    if found is None:
        return actor
    owners = bench.sql(
        "SELECT p.initials FROM person_key k JOIN person p ON p.id = k.person_id "
        "WHERE k.fingerprint LIKE :fp",
        fp=found.group(2) + "%",
    )
    mine = [row[0] for row in owners] == [found.group(1)]
    return f"{found.group(1)} key <own key>" if mine else actor


def _rows(bench: Bench, name: str, query: str) -> list[tuple[object, ...]]:
    rows = [tuple(row) for row in bench.sql(query)]
    if name == "audit":
        rows = [(action, _actor(bench, actor), entity) for action, actor, entity in rows]
    return rows


def differences(web: Bench, twin: Bench) -> dict[str, tuple[object, object]]:
    """Each query whose rows differ between the two stores."""
    out = {}
    for name, query in SAME.items():
        a, b = _rows(web, name, query), _rows(twin, name, query)
        if a != b:
            out[name] = (a, b)
    return out
