"""The error family and its exit codes."""

from __future__ import annotations

from testplan import errors


def test_exit_codes_are_the_documented_ones() -> None:
    assert (errors.EXIT_OK, errors.EXIT_USER, errors.EXIT_USAGE, errors.EXIT_FAILED) == (0, 1, 2, 3)
    assert errors.TestplanError("x").exit_code == 1
    assert errors.CriteriaFailedError("x").exit_code == 3
    for cls in (
        errors.CampaignFileError,
        errors.QuantityError,
        errors.IPCodeError,
        errors.PlanningError,
    ):
        assert issubclass(cls, errors.TestplanError)
        assert cls("x").exit_code == 1


def test_one_line_names_file_line_key_and_fix() -> None:
    err = errors.QuantityError(
        "'5 kg' is not a length", file="c.toml", line=12, key="device.height", fix="give a length"
    )
    assert err.one_line() == "c.toml:12: device.height: '5 kg' is not a length (give a length)"


def test_one_line_is_one_line_and_located_fills_only_gaps() -> None:
    err = errors.TestplanError("two\nlines", key="a.b")
    err.located(file="f.toml", line=3, key="ignored")
    assert err.one_line() == "f.toml:3: a.b: two lines"
    assert "\n" not in err.one_line()
