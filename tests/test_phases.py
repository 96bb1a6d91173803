"""Conditions judged per phase of a run's schedule, and channels with no band.

Hand-made cabinet logs on the sample campaign's Kb method-2 salt mist (3 cycles of a 2 h
spray and a 22 h humid storage) and on a continuous ISO 9227 NSS cabinet.
"""

from __future__ import annotations

import copy
import datetime as dt
from typing import Any

import numpy as np

from testplan.domain import judge as J
from testplan.domain import phases as P
from tests.helpers import plan
from tests.test_judge import GUARDED, SIMPLE, run, series, verdicts

HOUR_MIN = 60


def kb2_cabinet(overrides: dict[float, float] | None = None) -> J.Series:
    """Cabinet temperature every 5 min in each spray phase (minutes 0-115 of each 24 h), at
    34.5 degC except the readings ``overrides`` gives (minute -> degC)."""
    minutes = np.concatenate([np.arange(0, 120, 5) + 24 * HOUR_MIN * c for c in range(3)])
    values = np.full(len(minutes), 34.5)
    for m, v in (overrides or {}).items():
        if m in minutes:
            values[minutes == m] = v
        else:
            minutes = np.append(minutes, m)
            values = np.append(values, v)
    order = np.argsort(minutes)
    return series("cabinet_temperature", minutes[order], values[order], "degC", u=0.4)


def humid(quantity: str, value: float, overrides: dict[float, float] | None = None) -> J.Series:
    """A humidity-storage channel every 5 min over the whole 72 h, including the instant
    the run ends."""
    minutes = np.arange(0, 72 * HOUR_MIN + 1, 5).astype(float)
    values = np.full(len(minutes), value)
    for m, v in (overrides or {}).items():
        values[minutes == m] = v
    unit = "degC" if quantity == "humid_temperature" else "%"
    return series(quantity, minutes, values, unit)


def kb2(*extra: J.Series, cabinet: J.Series | None = None) -> J.RunData:
    return run(
        "salt-mist",
        cabinet if cabinet is not None else kb2_cabinet(),
        humid("humid_temperature", 40.0),
        humid("humid_rh", 93.0),
        *extra,
        hours=72,
        specimens=("S03", "S04", "S05"),
    )


def only(data: J.RunData, criterion: str, rule: J.Rule = SIMPLE) -> J.Verdict:
    (v,) = [v for v in J.judge_run(data, rule) if v.criterion == criterion]
    return v


def test_the_kb_method_2_schedule_repeats_spray_and_humid_storage() -> None:
    # source: IEC 60068-2-52 Ed. 3 method 2 (from memory): 2 h spray, 22 h humid storage,
    # 3 cycles
    spans = P.schedule(kb2().procedure)
    assert [(s.name, s.cycle, s.start_h, s.end_h) for s in spans] == [
        ("salt_spray", 1, 0.0, 2.0),
        ("humid_storage", 1, 2.0, 24.0),
        ("salt_spray", 2, 24.0, 26.0),
        ("humid_storage", 2, 26.0, 48.0),
        ("salt_spray", 3, 48.0, 50.0),
        ("humid_storage", 3, 50.0, 72.0),
    ]
    assert [s.last for s in spans] == [False] * 5 + [True]
    assert spans[2].shown() == "the salt spray phase of cycle 2"


def test_kb_methods_3_to_6_add_a_standard_atmosphere_band() -> None:
    # source: IEC 60068-2-52 Ed. 3 methods 3-6 (from memory): 4 x (2 h spray + 22 h humid
    # storage at 40 +/-2 degC, 93 % RH), then 3 d at 23 +/-2 degC, 50 +/-5 % RH
    p = plan(target={"code": "IPX7"}, salt_mist={"standard": "IEC 60068-2-52", "test_method": 4})
    proc = p.procedure("salt-mist").to_json()
    spans = P.schedule(proc)
    assert len(spans) == 18 and spans[8] == P.PhaseSpan("standard_atmosphere", 1, 96.0, 168.0)
    bands = {c["id"]: c for c in proc["criteria"] if "phase" in c}
    assert bands["salt-mist.storage_temperature"]["limits"] == {
        "unit": "degC",
        "min": 21.0,
        "max": 25.0,
    }
    assert bands["salt-mist.storage_rh"]["phase"] == "standard_atmosphere"
    assert bands["salt-mist.spray_temperature"]["phase"] == "salt_spray"
    # Method 2 has no standard-atmosphere storage, so no band for it.
    assert "salt-mist.storage_temperature" not in {c["id"] for c in kb2().procedure["criteria"]}


def test_a_reading_of_35_7_degc_in_a_spray_phase_fails_it() -> None:
    # source: IEC 60068-2-52 Ed. 3 cl. 7 (from memory): the spray phase at 15 to 35 degC
    data = kb2(cabinet=kb2_cabinet({24 * HOUR_MIN + 40: 35.7, 24 * HOUR_MIN + 45: 35.2}))
    v = only(data, "salt-mist.spray_temperature")
    assert v.outcome == J.FAIL and v.measured == 35.7
    assert (v.limit_min, v.limit_max) == (15.0, 35.0)
    assert v.margin is not None and abs(v.margin + 0.7) < 1e-9
    # The window is the phase it fell in: cycle 2's spray, 24 h to 26 h from the start.
    assert v.window_start is not None and v.window_end is not None
    assert (v.window_start - data.started_at).total_seconds() == 24 * 3600
    assert (v.window_end - data.started_at).total_seconds() == 26 * 3600
    assert v.detail == (
        "35.7 degC against 15 to 35 degC; worst in the salt spray phase of cycle 2 (3 such "
        "phase(s) judged); outside the band for about 10 min, first at 2027-01-13 16:40:00Z"
    )
    # A failed condition: the run is invalid unless a deviation covers it.
    triples = [(x.criterion, x.quantity, x.outcome) for x in J.judge_run(data, SIMPLE)]
    assert "salt-mist.spray_temperature" in J.uncovered_conditions(triples, set())
    covered = J.uncovered_conditions(triples, {"salt-mist.spray_temperature"})
    assert "salt-mist.spray_temperature" not in covered


def test_the_same_reading_passes_a_35_plus_minus_2_degc_nss_cabinet() -> None:
    # source: ISO 9227:2022 cl. 8 (from memory): NSS cabinet at 35 +/-2 degC throughout
    proc = (
        plan(
            target={"code": "IPX7"},
            salt_mist={"standard": "ISO 9227", "test_method": "NSS", "duration": "72 h"},
        )
        .procedure("salt-mist")
        .to_json()
    )
    assert [(s.name, s.start_h, s.end_h, s.last) for s in P.schedule(proc)] == [
        ("exposure", 0.0, 72.0, True)
    ]
    minutes = np.arange(0, 72 * HOUR_MIN + 1, 5)
    values = np.full(len(minutes), 35.0)
    values[minutes == 24 * HOUR_MIN + 40] = 35.7
    data = run("salt-mist", series("cabinet_temperature", minutes, values, "degC"), hours=72)
    data.procedure = proc
    v = only(data, "salt-mist.temperature")
    assert v.outcome == J.PASS and v.measured == 35.7
    assert "worst in the exposure phase (1 such phase(s) judged)" in v.detail


def test_phase_boundaries_belong_to_the_next_phase_and_the_end_to_the_last() -> None:
    # A reading at exactly 2 h is the first of humid storage, not the last of the spray:
    # 37 degC there leaves the spray band alone and fails humid storage's 38 to 42 degC.
    two_h = 2 * HOUR_MIN
    data = kb2(cabinet=kb2_cabinet({two_h: 37.0}))
    assert only(data, "salt-mist.spray_temperature").outcome == J.PASS
    data = kb2(cabinet=kb2_cabinet())
    data.series[1] = humid("humid_temperature", 40.0, {two_h: 37.0})
    v = only(data, "salt-mist.humid_temperature")
    assert v.outcome == J.FAIL and "humid storage phase of cycle 1" in v.detail
    # One reading before the boundary is in the spray phase, where humid storage's band
    # does not apply.
    data.series[1] = humid("humid_temperature", 40.0, {two_h - 5: 37.0})
    assert only(data, "salt-mist.humid_temperature").outcome == J.PASS
    # The run's last instant belongs to the last phase.
    data.series[1] = humid("humid_temperature", 40.0, {72 * HOUR_MIN: 43.0})
    v = only(data, "salt-mist.humid_temperature")
    assert v.outcome == J.FAIL and "humid storage phase of cycle 3" in v.detail


def test_a_phase_without_readings_is_no_data_never_a_pass() -> None:
    cab = kb2_cabinet()
    keep = cab.t_us < cab.t_us[0] + 48 * 3600 * 10**6  # nothing logged in cycle 3's spray
    cab = J.Series(cab.quantity, None, cab.t_us[keep], cab.value[keep], "degC", 0.4, 2.0)
    v = only(kb2(cabinet=cab), "salt-mist.spray_temperature", GUARDED)
    assert v.outcome == J.NO_DATA
    assert v.detail == "no cabinet_temperature reading in the salt spray phase of cycle 3"
    # A spray logged only from its 30th minute misses its start.
    late = kb2_cabinet()
    drop = (late.t_us - late.t_us[0]) // 60_000_000 < 30
    late = J.Series(late.quantity, None, late.t_us[~drop], late.value[~drop], "degC")
    v = only(kb2(cabinet=late), "salt-mist.spray_temperature")
    assert v.outcome == J.NO_DATA
    assert v.detail == (
        "first cabinet_temperature reading 30 min after the phase began in the salt spray "
        "phase of cycle 1"
    )


def test_a_band_with_nothing_logged_is_not_logged_and_cannot_pass() -> None:
    data = run("salt-mist", kb2_cabinet(), humid("humid_temperature", 40.0), hours=72)
    v = only(data, "salt-mist.humid_rh")
    assert v.outcome == J.NO_DATA and v.detail == "not logged: no humid_rh on this run"
    triples = [(x.criterion, x.quantity, x.outcome) for x in J.judge_run(data, SIMPLE)]
    assert "salt-mist.humid_rh" in J.uncovered_conditions(triples, set())


def test_a_channel_the_plan_gives_no_band_is_logged_no_band() -> None:
    minutes = np.arange(0, 72 * HOUR_MIN + 1, 60)
    lab = series("ambient_temperature", minutes, 20.0 + (minutes % 120 == 0) * 1.5, "degC")
    data = kb2(lab)
    (v,) = [x for x in J.judge_run(data, SIMPLE) if x.quantity == "ambient_temperature"]
    assert v.outcome == J.LOGGED_NO_BAND and v.criterion == "salt-mist.logged_ambient_temperature"
    assert v.detail == ("73 reading(s) from 20 to 21.5 degC; the plan gives this channel no band")
    assert v.sources == ["ambient_temperature:None"]
    # Reported, never judged: it makes no run invalid and does not change a run's outcome.
    assert J.uncovered_conditions([(v.criterion, v.quantity, v.outcome)], set()) == []
    assert J.worst([J.PASS, v.outcome]) == J.PASS
    # A channel a worked-out criterion reads has its band through that criterion.
    assert not [x for x in verdicts(kb2(), SIMPLE, "humid_rh") if x.outcome == J.LOGGED_NO_BAND]
    water = run("water-8", series("water_temperature", [0, 1], [12.0, 12.0], "degC"))
    assert not [x for x in J.judge_run(water, SIMPLE) if x.outcome == J.LOGGED_NO_BAND]


def test_phase_names_of_a_procedure_without_a_schedule() -> None:
    endurance: dict[str, Any] = {"family": "endurance", "parameters": {}}
    assert P.schedule(endurance) == [] and P.phase_names(endurance) == []
    assert P.phase_names(kb2().procedure) == ["salt_spray", "humid_storage"]


def test_declared_phases_give_a_schedule_but_no_bands() -> None:
    proc = (
        plan(
            target={"code": "IPX7"},
            salt_mist={
                "standard": "IEC 60068-2-52",
                "test_method": 8,
                "cycles": 2,
                "phases": [
                    {"name": "Spray", "duration": "2 h", "temperature": "35 degC"},
                    {"name": "dry", "duration": "6 h", "temperature": "60 degC"},
                ],
            },
        )
        .procedure("salt-mist")
        .to_json()
    )
    assert [(s.name, s.cycle, s.start_h, s.end_h) for s in P.schedule(proc)] == [
        ("Spray", 1, 0.0, 2.0),
        ("dry", 1, 2.0, 8.0),
        ("Spray", 2, 8.0, 10.0),
        ("dry", 2, 10.0, 16.0),
    ]
    assert not [c for c in proc["criteria"] if "phase" in c]
    data = run("salt-mist", series("cabinet_temperature", [0, 5], [35.0, 35.2], "degC"), hours=16)
    data.procedure = proc
    (v,) = [x for x in J.judge_run(data, SIMPLE) if x.quantity == "cabinet_temperature"]
    assert v.outcome == J.LOGGED_NO_BAND


def test_a_shifted_start_or_a_phase_the_schedule_lacks_cannot_pass() -> None:
    # The schedule is placed from the recorded start: a start recorded an hour early leaves
    # the first hour of each spray phase without a reading.
    data = kb2()
    data.started_at = data.started_at - dt.timedelta(hours=1)
    v = only(data, "salt-mist.spray_temperature")
    assert v.outcome == J.NO_DATA
    assert v.detail == (
        "first cabinet_temperature reading 60 min after the phase began in the salt spray "
        "phase of cycle 1"
    )
    data = kb2()
    data.procedure = copy.deepcopy(data.procedure)
    for c in data.procedure["criteria"]:
        if c["id"] == "salt-mist.spray_temperature":
            c["phase"] = "drying"
    v = only(data, "salt-mist.spray_temperature")
    assert v.outcome == J.NO_DATA and v.detail == "the run's phase schedule has no drying phase"
