"""Pilot data: SD and Browne's upper limit, error messages, the pilot command and check's findings."""

from __future__ import annotations

import hashlib
import statistics
import textwrap

import numpy as np
import pytest
from scipy import stats

from registry.pilot import InvalidPilot, PilotMissing, read_column, read_pilot, sd_upper_limit

VALUES = [12.1, 9.8, 11.4, 10.9, 13.2, 8.7, 10.1, 12.6, 11.0, 9.5]


def _csv(tmp_path, text, name="pilot.csv"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text).lstrip(), encoding="utf-8")
    return path


def _values_csv(tmp_path, values=VALUES, name="pilot.csv"):
    lines = ["animal,group,weight"] + [f"a{i},control,{v}" for i, v in enumerate(values)]
    return _csv(tmp_path, "\n".join(lines) + "\n", name)


def test_sd_matches_statistics_and_numpy(tmp_path):
    summary = read_pilot(_values_csv(tmp_path), "weight")
    # Python's statistics.stdev and numpy's std with ddof=1 (the n - 1 denominator)
    assert summary.sd == pytest.approx(statistics.stdev(VALUES), rel=1e-12)
    assert summary.sd == pytest.approx(float(np.std(VALUES, ddof=1)), rel=1e-12)
    assert summary.mean == pytest.approx(float(np.mean(VALUES)), rel=1e-12)
    assert summary.n == len(VALUES)


@pytest.mark.parametrize("sd, n, confidence", [(1.0, 10, 0.8), (4.2, 6, 0.9), (0.35, 30, 0.95), (2.0, 2, 0.8)])
def test_upper_limit_matches_a_direct_chi_square_formula(sd, n, confidence):
    # Browne (1995): sd * sqrt((n - 1) / chi2 lower (1 - confidence) quantile), via scipy.stats.chi2.ppf
    expected = sd * np.sqrt((n - 1) / stats.chi2.ppf(1 - confidence, n - 1))
    assert sd_upper_limit(sd, n, confidence) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("n, confidence", [(8, 0.8), (20, 0.9)])
def test_upper_limit_covers_the_true_sd_at_the_stated_rate(n, confidence):
    # Simulation of coverage: P(sigma <= upper limit) = confidence for normal data, within 3 SE.
    rng = np.random.default_rng(1995)
    reps, sigma = 40_000, 3.0
    sds = rng.normal(10.0, sigma, size=(reps, n)).std(axis=1, ddof=1)
    covered = np.mean(sds * sd_upper_limit(1.0, n, confidence) >= sigma)
    assert abs(covered - confidence) < 3 * np.sqrt(confidence * (1 - confidence) / reps)


def test_missing_cells_are_skipped_and_counted(tmp_path):
    path = _csv(tmp_path, """
        id;weight
        1;4.0
        2;
        3;NA
        4;6.0

        5;5.0
        """)
    summary = read_pilot(path, "weight")
    assert (summary.n, summary.missing) == (3, 2)
    assert summary.sd == pytest.approx(1.0)


def test_sha256_is_of_the_file_bytes(tmp_path):
    path = _values_csv(tmp_path)
    assert read_pilot(path, "weight").sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.mark.parametrize("text, column, message", [
    ("id,weight\n1,4.0\n2,5.0\n", "mass", "pilot.csv:1: no column 'mass'; the header has 'id', 'weight'"),
    ("id,weight\n1,4.0\n2,heavy\n3,5.0\n", "weight",
     "pilot.csv:3: column 'weight': the cell (5 characters, not shown) is not a number"),
    ("id;weight\n1;4,5\n2;5,0\n", "weight", "write decimals with a point"),
    ("id,weight\n1,4.0\n", "weight", "column 'weight' has 1 numeric value; an SD needs at least 2"),
    ("", "weight", "the file is empty"),
    ("id,weight\n1,inf\n2,3\n", "weight", "pilot.csv:2: column 'weight': 'inf' is not a finite number"),
])
def test_clear_errors_name_file_line_and_column(tmp_path, text, column, message):
    path = tmp_path / "pilot.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InvalidPilot) as error:
        read_pilot(path, column, shown="pilot.csv")
    assert message in str(error.value)


def test_missing_file(tmp_path):
    with pytest.raises(PilotMissing, match="gone.csv: pilot data file not found"):
        read_pilot(tmp_path / "gone.csv", "weight", shown="gone.csv")


def test_read_column_plain_text():
    values, missing = read_column("x\n1\n2\n\n3\n", "x")
    assert values == [1.0, 2.0, 3.0] and missing == 0


def test_pilot_command(run, tmp_path):
    path = _values_csv(tmp_path)
    result = run("pilot", path, "--column", "weight", "--confidence", "0.9")
    assert result.status == 0, result.err
    assert hashlib.sha256(path.read_bytes()).hexdigest() in result.out
    assert f"{statistics.stdev(VALUES):.6g}" in result.out
    assert f"{sd_upper_limit(statistics.stdev(VALUES), 10, 0.9):.6g}" in result.out
    data = run("pilot", path, "--column", "weight", "--json").json()
    assert data["n"] == 10 and data["confidence"] == 0.8
    bad = run("pilot", path, "--column", "mass")
    assert bad.status == 2 and "no column 'mass'" in bad.err and "Traceback" not in bad.err
    assert run("pilot", path, "--column", "weight", "--confidence", "80").status == 2


SPEC = """\
id: pilot-demo
title: Invented demo
status: draft
data_collection:
  start: 2027-03-01
design:
  test: two-sample-t
  effect:
    difference: 2.0
    sd: {sd}
  pilot:
    file: data/pilot.csv
    column: weight
    sha256: "{sha}"
sample_size:
  per_group: {n}
"""


def _registry(tmp_path, sd=2.5, n=40, sha=None):
    folder = tmp_path / "reg"
    (folder / "data").mkdir(parents=True)
    csv_path = _values_csv(folder / "data")
    digest = sha or hashlib.sha256(csv_path.read_bytes()).hexdigest()
    (folder / "pilot-demo.yaml").write_text(SPEC.format(sd=sd, sha=digest, n=n), encoding="utf-8")
    return folder, csv_path


def _kinds(data):
    return {(f["kind"], f["severity"]) for f in data["specs"][0]["findings"]}


def test_check_accepts_a_conservative_sd(run, tmp_path):
    folder, _ = _registry(tmp_path, sd=2.5)  # above the pilot SD 1.43 and its 80% upper limit 1.86
    result = run("check", folder, "--json")
    assert result.status == 0
    assert ("pilot-sd", "info") in _kinds(result.json())


def test_check_warns_when_sd_is_below_the_pilot_sd(run, tmp_path):
    folder, _ = _registry(tmp_path, sd=1.0, n=20)
    data = run("check", folder, "--json").json()
    assert ("sd-below-pilot", "warning") in _kinds(data)


def test_check_warns_when_the_pilot_file_changed(run, tmp_path):
    folder, csv_path = _registry(tmp_path)
    csv_path.write_text(csv_path.read_text() + "a99,control,14.0\n", encoding="utf-8")
    result = run("check", folder, "--json")
    assert ("pilot-changed", "warning") in _kinds(result.json())
    assert result.status == 0  # a warning, not an error


def test_check_errors_when_the_pilot_file_is_gone(run, tmp_path):
    folder, csv_path = _registry(tmp_path)
    csv_path.unlink()
    result = run("check", folder, "--json")
    assert result.status == 1
    finding = next(f for f in result.json()["specs"][0]["findings"] if f["kind"] == "pilot-missing")
    assert finding["severity"] == "error" and finding["field"] == "design.pilot.file" and finding["line"] == 12
    human = run("check", folder)
    assert "pilot data file not found" in human.out
