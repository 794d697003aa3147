"""Property tests over generated specs (hypothesis, derandomized; 1,000 examples in all):
the reader and ``check`` end every bad spec with one clear line per problem and no traceback,
and ``check`` refuses exactly what ``packet`` refuses."""

from __future__ import annotations

import tempfile
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from spec_strategies import BASE, near_valid_specs, plausible_specs, to_toml

from buildsheet.cli.main import main
from buildsheet.errors import SpecError
from buildsheet.spec.reader import read_spec_text

_SLOW_OK = [HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.function_scoped_fixture]


def examples(n: int) -> settings:
    return settings(max_examples=n, suppress_health_check=_SLOW_OK)


def test_the_writer_round_trips_the_base_spec():
    assert tomllib.loads(to_toml(BASE)) == BASE
    read_spec_text(to_toml(BASE), "spec.toml")  # the base spec itself is valid


@examples(550)
@given(spec=near_valid_specs())
def test_reader_reports_problems_and_never_crashes(spec):
    text = to_toml(spec)
    try:
        design = read_spec_text(text, "spec.toml")
    except SpecError as exc:
        lines = [str(p) for p in exc.problems]
        assert lines and len(lines) == len(set(lines))  # each problem once
        for line in lines:
            assert line.startswith("spec.toml"), line  # names the file ...
            assert "\n" not in line and len(line) < 600, line  # ... on one line
            assert "datetime." not in line and "<class" not in line, line  # no Python reprs
    else:
        assert design.kits and design.designs


def _run(argv: list[str], capsys) -> tuple[int, str]:
    code = main(argv)
    err = capsys.readouterr().err
    return code, err


@examples(390)
@given(spec=near_valid_specs())
def test_check_ends_every_spec_cleanly(spec, capsys):
    """The whole check path (reader, model, label pre-flight): exit 0 or 1, error lines name
    the file and are printed once; anything else would raise here with its traceback."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "spec.toml"
        path.write_text(to_toml(spec), encoding="utf-8")
        code, err = _run(["check", str(path), "--model", "closed_form"], capsys)
    assert code in (0, 1)
    errors = [line for line in err.splitlines() if line.startswith("error:")]
    assert (code == 1) == bool(errors)
    assert len(errors) == len(set(errors))
    for line in errors:
        assert "spec.toml" in line, line


@examples(60)
@given(spec=st.one_of(plausible_specs(), near_valid_specs()))
def test_check_and_packet_agree(spec, capsys):
    """Over a generated corpus, ``check`` succeeds exactly when ``packet`` does."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "spec.toml"
        path.write_text(to_toml(spec), encoding="utf-8")
        checked, check_err = _run(["check", str(path), "--model", "closed_form"], capsys)
        built, build_err = _run(["packet", str(path), "-o", str(Path(tmp) / "out"),
                                 "--model", "closed_form"], capsys)
    assert (checked == 0) == (built == 0), (check_err, build_err)
    assert "Traceback" not in check_err + build_err


@pytest.mark.parametrize("title", ["x" * 200, "word " * 40, '<img src="/etc/hosts"/>' * 8])
def test_long_titles_build(tmp_path, capsys, title):
    """Regression: a long title raised a layout error; now capped at 200 characters and
    wrapped (long words split)."""
    spec = {**BASE, "designs": {"d": {**BASE["designs"]["d"], "title": title[:200]}}}
    path = tmp_path / "spec.toml"
    path.write_text(to_toml(spec), encoding="utf-8")
    assert _run(["packet", str(path), "-o", str(tmp_path / "out"), "--model", "closed_form"],
                capsys)[0] == 0
