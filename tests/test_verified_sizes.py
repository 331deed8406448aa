"""Simulation-verified sizes: the reported n reaches the target for the real test, n - 1 does not."""

from __future__ import annotations

import json
import math
import textwrap
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest
from scipy import stats
from statsmodels.duration.survfunc import survdiff

from registry.checks import check_file
from registry.discovery import SpecFile
from registry.power import design_from_params, power, sample_size
from registry.power.cache import SizeCache
from registry.power.log_rank import log_rank_z
from registry.power.simulate import simulated_power
from registry.power.verify import needs_verification, verified_sample_size

REPS = 10_000  # standard error 0.004 at power 0.8: the shortfalls below are 3 to 16 standard errors


def test_log_rank_statistic_matches_statsmodels_survdiff():
    # statsmodels.duration.survfunc.survdiff: the log-rank chi-square, the square of our z.
    rng = np.random.default_rng(11)
    time = rng.exponential(1.0, (5, 40)) * np.r_[np.ones(20), np.full(20, 1.8)]
    censor = rng.uniform(0.2, 2.5, (5, 40))
    event = time <= censor
    group = np.r_[np.zeros(20), np.ones(20)].astype(bool)
    z = log_rank_z(np.minimum(time, censor), event, group)
    for i in range(5):
        chisq, _ = survdiff(np.minimum(time, censor)[i], event[i].astype(int), group.astype(int))
        assert z[i] ** 2 == pytest.approx(chisq, rel=1e-9)


@pytest.mark.parametrize("test, params", [
    # Schoenfeld's formula with complete follow-up: the log-rank test falls short at the formula's n (0.789).
    ("log-rank", dict(hr=0.6, event_probability=1.0)),
    # Unequal allocation and a large hazard ratio: 0.736 at the formula's n.
    ("log-rank", dict(hr=3.0, event_probability=1.0, allocation_ratio=2.0)),
    # Rank tests sized by asymptotic relative efficiency on non-normal shapes (0.775 and 0.736).
    ("mann-whitney", dict(d=0.5, distribution="laplace")),
    ("signed-rank", dict(d=0.5, distribution="uniform")),
])
def test_verified_n_holds_in_an_independent_simulation_and_the_formula_does_not(test, params, tmp_path):
    design = design_from_params(test, **params)
    result = verified_sample_size(design, reps=REPS, cache_dir=tmp_path)
    n, start = result.n_per_group, result.start_n
    assert result.label == "simulation" and start == sample_size(test, **params).n_per_group
    assert result.achieved_power >= 0.8 > result.verification["power_below"]
    # An independent seed: the formula's n misses the target, the verified n reaches it within 3 SE.
    se = math.sqrt(0.8 * 0.2 / REPS)
    assert simulated_power(design, start, reps=REPS, seed=99).power < 0.8 - se
    assert simulated_power(design, n, reps=REPS, seed=99).power > 0.8 - 3 * se


def test_mann_whitney_verified_n_holds_with_scipy_one_replicate_at_a_time():
    # scipy.stats.mannwhitneyu on each simulated experiment (Laplace outcomes, shift 0.5 SD).
    design = design_from_params("mann-whitney", d=0.5, distribution="laplace")
    n = verified_sample_size(design, reps=REPS).n_per_group
    rng = np.random.default_rng(3)
    reps = 2000
    hits = sum(stats.mannwhitneyu(rng.laplace(0.5, 1 / math.sqrt(2), n), rng.laplace(0, 1 / math.sqrt(2), n)).pvalue
               < 0.05 for _ in range(reps))
    assert hits / reps > 0.8 - 3 * math.sqrt(0.16 / reps)


def test_signed_rank_verified_n_holds_with_scipy_wilcoxon():
    # scipy.stats.wilcoxon on each simulated experiment (uniform differences, shift 0.5 SD).
    design = design_from_params("signed-rank", d=0.5, distribution="uniform")
    n = verified_sample_size(design, reps=REPS).n_per_group
    rng = np.random.default_rng(4)
    reps = 2000
    hits = sum(stats.wilcoxon(rng.uniform(-math.sqrt(3), math.sqrt(3), n) + 0.5).pvalue < 0.05
               for _ in range(reps))
    assert hits / reps > 0.8 - 3 * math.sqrt(0.16 / reps)


def test_search_is_reproducible_and_an_executor_gives_the_same_answer():
    design = design_from_params("log-rank", hr=0.5, event_probability=0.8)
    alone = verified_sample_size(design, reps=2000)
    with ThreadPoolExecutor(2) as pool:
        pooled = verified_sample_size(design, reps=2000, executor=pool)
    assert (alone.n_per_group, alone.achieved_power) == (pooled.n_per_group, pooled.achieved_power)
    assert alone == verified_sample_size(design, reps=2000)


def test_cache_is_used_and_a_damaged_entry_is_rebuilt(tmp_path):
    design = design_from_params("log-rank", hr=0.5, event_probability=0.8)
    first = verified_sample_size(design, reps=2000, cache_dir=tmp_path)
    entries = list(tmp_path.glob("*.json"))
    assert len(entries) == 1
    seen = []
    again = verified_sample_size(design, reps=2000, cache_dir=tmp_path, progress=lambda d, t: seen.append(d))
    assert again == first and seen == []  # answered from the cache: nothing simulated
    entries[0].write_text("{not json", encoding="utf-8")
    rebuilt = verified_sample_size(design, reps=2000, cache_dir=tmp_path, progress=lambda d, t: seen.append(d))
    assert rebuilt == first and seen  # simulated again
    assert json.loads(entries[0].read_text(encoding="utf-8"))["value"]["n"] == first.n_per_group
    assert SizeCache(tmp_path).get("0" * 64) is None


def test_which_designs_are_verified():
    assert needs_verification(design_from_params("log-rank", hr=0.6, event_probability=0.7))
    assert needs_verification(design_from_params("mann-whitney", d=0.5))
    assert not needs_verification(design_from_params("two-sample-t", d=0.5))
    assert needs_verification(design_from_params("two-sample-t", d=0.5, simulation={
        "distribution": "lognormal", "baseline_mean": 3.0, "reps": 1000}))
    assert not needs_verification(design_from_params("log-rank", hr=0.6, event_probability=0.7,
                                                     cluster={"size": 5, "icc": 0.1}))


def test_check_reports_the_verified_n_as_the_requirement(tmp_path):
    text = textwrap.dedent("""\
        id: tumour-survival
        title: Survival of treated and control mice
        status: draft
        data_collection:
          start: 2028-01-01
        design:
          test: log-rank
          effect:
            hr: 3.0
            event_probability: 1.0
          allocation_ratio: 2.0
          simulation:
            reps: 5000
        sample_size:
          per_group: 10
        """)
    path = tmp_path / "tumour-survival.yaml"
    path.write_text(text, encoding="utf-8")
    report = check_file(SpecFile(path=path, display="tumour-survival.yaml", root=tmp_path))
    formula = sample_size("log-rank", hr=3.0, event_probability=1.0, allocation_ratio=2.0).n_per_group
    assert formula == 10
    assert report.sample.label == "simulation" and report.sample.n_per_group > formula
    assert report.verdict == "underpowered"
    assert report.at_planned.power < 0.8  # the simulated power at the planned 10


def test_log_rank_with_only_a_hazard_ratio_answers_the_events(run):
    # Schoenfeld (1983): events 4 (z_a + z_b)^2 / log(hr)^2 with scipy's normal quantiles.
    expected = math.ceil(4 * (stats.norm.isf(0.025) + stats.norm.ppf(0.8)) ** 2 / math.log(0.6) ** 2)
    result = run("size", "log-rank", "--hr", "0.6", "--json")
    assert result.status == 0, result.err
    data = result.json()
    assert data["events"] == expected and data["n_per_group"] is None
    assert "event_probability" in data["message"]
    human = run("size", "log-rank", "--hr", "0.6")
    assert human.status == 0 and f"{expected:,}" in human.out and "not computed" in human.out


def test_check_reports_events_only_as_a_warning(tmp_path):
    text = textwrap.dedent("""\
        id: graft-survival
        title: Graft survival with two conditioning regimens
        status: draft
        data_collection:
          start: 2028-01-01
        design:
          test: log-rank
          effect:
            hr: 0.6
        sample_size:
          per_group: 80
        """)
    path = tmp_path / "graft-survival.yaml"
    path.write_text(text, encoding="utf-8")
    report = check_file(SpecFile(path=path, display="graft-survival.yaml", root=tmp_path))
    finding = next(f for f in report.findings if f.kind == "events-only")
    assert finding.severity == "warning" and finding.line == 9 and "121 events" in finding.message
    assert not report.has_errors


def test_size_with_workers_gives_the_same_verified_answer(run, tmp_path, monkeypatch):
    # Processes carry the candidates; the answer is the one a single process finds.
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))  # a fresh user cache: the pool really runs
    argv = ("size", "log-rank", "--hr", "0.5", "--param", "event_probability=0.8", "--simulate", "2000", "--json")
    pooled = run(*argv, "--workers", "2")
    assert pooled.status == 0, pooled.err
    data = pooled.json()
    alone = verified_sample_size(design_from_params("log-rank", hr=0.5, event_probability=0.8,
                                                    simulation={"reps": 2000}))
    assert (data["n_per_group"], data["achieved_power"]) == (alone.n_per_group, alone.achieved_power)
    assert data["label"] == "simulation" and data["start_n"] == alone.start_n
    assert run("size", "log-rank", "--hr", "0.5", "--workers", "0").status == 2


def test_size_at_n_reports_the_simulated_power_of_the_test(run, tmp_path, monkeypatch):
    # `size --n` for a simulation-verified family: the power is the simulated test's, with its
    # replicates, seed and standard error; the formula's power is given beside it. At the verified
    # n it is the search's own estimate (same settings, common random numbers).
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    design = design_from_params("log-rank", hr=0.5, event_probability=0.8, simulation={"reps": 2000})
    verified = verified_sample_size(design)
    argv = ("size", "log-rank", "--hr", "0.5", "--param", "event_probability=0.8", "--simulate", "2000")
    result = run(*argv, "--n", str(verified.n_per_group), "--json")
    assert result.status == 0, result.err
    data = result.json()
    assert data["power"] == verified.achieved_power
    assert data["power"] == simulated_power(design, verified.n_per_group, reps=2000, seed=data["verification"]["seed"]).power
    assert data["verification"]["reps"] == 2000
    assert data["verification"]["standard_error"] == pytest.approx(math.sqrt(data["power"] * (1 - data["power"]) / 2000))
    formula = power("log-rank", verified.n_per_group, hr=0.5, event_probability=0.8)
    assert data["formula_power"] == pytest.approx(formula.power, rel=1e-12)
    below = run(*argv, "--n", str(verified.n_per_group - 1), "--json").json()
    assert below["power"] == verified.verification["power_below"] < 0.8
    human = run(*argv, "--n", str(verified.n_per_group))
    assert "simulation of the Log-rank test" in human.out and "2,000 simulated experiments" in human.out
    assert "formula" in human.out and "Monte Carlo standard error" in human.out


def test_size_at_n_of_a_formula_family_is_not_simulated(run):
    data = run("size", "two-sample-t", "--d", "0.5", "--n", "64", "--json").json()
    assert data["verification"] is None and data["formula_power"] is None


def test_check_names_the_simulated_power_in_its_finding(tmp_path):
    text = textwrap.dedent("""\
        id: wound-closure
        title: Time to wound closure with two dressings
        status: draft
        data_collection:
          start: 2028-01-01
        design:
          test: log-rank
          effect:
            hr: 0.5
            event_probability: 0.8
          simulation:
            reps: 2000
        sample_size:
          per_group: 30
        """)
    path = tmp_path / "wound-closure.yaml"
    path.write_text(text, encoding="utf-8")
    report = check_file(SpecFile(path=path, display="wound-closure.yaml", root=tmp_path))
    design = design_from_params("log-rank", hr=0.5, event_probability=0.8, simulation={"reps": 2000})
    assert report.at_planned.power == simulated_power(design, 30, reps=2000, seed=design.simulation.seed).power
    assert report.at_planned.verification["reps"] == 2000
    finding = next(f for f in report.findings if f.kind == "underpowered")
    assert f"simulated power {report.at_planned.power:.3f}" in finding.message


# --- clustered designs ---------------------------------------------------------------------------

def test_cluster_means_simulation_with_equal_sizes_agrees_with_the_noncentral_t():
    # The t-test on k1 = k2 = 6 cluster means of m = 8 units, icc 0.1, d = 0.8: noncentral t with
    # df = 10 and ncp = d / sqrt((icc + (1 - icc) / m) (2 / k)) (Donner & Klar 2000, ch. 5), from scipy.
    design = design_from_params("two-sample-t", d=0.8, cluster={"size": 8, "icc": 0.1})
    k, m, icc = 6, 8, 0.1
    ncp = 0.8 / math.sqrt((icc + (1 - icc) / m) * 2 / k)
    crit = stats.t.isf(0.025, 2 * k - 2)
    exact = stats.nct.sf(crit, 2 * k - 2, ncp) + stats.nct.cdf(-crit, 2 * k - 2, ncp)
    result = simulated_power(design, k * m, reps=20_000, seed=5)
    assert abs(result.power - exact) < 3 * result.standard_error


def test_unequal_cluster_sizes_are_verified_by_a_clustered_simulation(tmp_path):
    # Cluster sizes with CV 0.9 (m = 8, icc 0.1, d = 0.6): the first-order variance promises 0.82 with
    # 15 clusters per group; the simulated cluster-means t-test gives about 0.76 there.
    params = dict(d=0.6, cluster={"size": 8, "icc": 0.1, "size_cv": 0.9})
    design = design_from_params("two-sample-t", **params)
    assert needs_verification(design)
    assert not needs_verification(design_from_params("two-sample-t", d=0.6, cluster={"size": 8, "icc": 0.1}))
    formula = sample_size("two-sample-t", **params)
    result = verified_sample_size(design, reps=REPS, cache_dir=tmp_path)
    k = result.clusters_per_group[0]
    assert result.label == "simulation" and result.start_n == formula.n_per_group
    assert result.n_per_group == k * 8 and result.clusters_per_group == (k, k) and k > formula.clusters_per_group[0]
    assert result.achieved_power >= 0.8 > result.verification["power_below"]
    se = math.sqrt(0.8 * 0.2 / REPS)  # an independent seed
    assert formula.achieved_power > 0.8 > simulated_power(design, formula.n_per_group, reps=REPS, seed=99).power + 3 * se
    assert simulated_power(design, result.n_per_group, reps=REPS, seed=99).power > 0.8 - 3 * se


def test_check_warns_that_a_design_effect_size_is_an_unverified_approximation(tmp_path):
    text = textwrap.dedent("""\
        id: cage-lesions
        title: Skin lesions per mouse in two bedding types, mice in cages
        status: draft
        data_collection:
          start: 2028-01-01
        design:
          test: poisson-rate
          effect:
            rate1: 2.0
            rate2: 1.5
            exposure: 1.0
          cluster:
            size: 6
            icc: 0.1
        sample_size:
          per_group: 60
        """)
    path = tmp_path / "cage-lesions.yaml"
    path.write_text(text, encoding="utf-8")
    report = check_file(SpecFile(path=path, display="cage-lesions.yaml", root=tmp_path))
    assert report.sample.label == "design-effect approximation"
    finding = next(f for f in report.findings if f.kind == "approximate-size" and f.field == "design.cluster")
    assert finding.severity == "warning" and "not verified" in finding.message and "design effect 1.5" in finding.message


def test_sequential_power_at_n_does_not_claim_simulation(run):
    # With interim looks the power at n is the boundaries' (normal theory), not a simulation.
    data = run("size", "log-rank", "--hr", "0.5", "--param", "event_probability=0.8", "--param", "sequential.looks=2",
               "--n", "50", "--json").json()
    assert data["verification"] is None and data["formula_power"] is None


def test_sequential_power_at_n_uses_the_verified_fixed_design_as_check_does(run, tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    argv = ("size", "log-rank", "--hr", "0.5", "--param", "event_probability=0.8", "--param", "sequential.looks=2",
            "--param", "simulation.reps=1000")
    data = run(*argv, "--n", "50", "--json").json()
    fixed = verified_sample_size(design_from_params("log-rank", hr=0.5, event_probability=0.8,
                                                    sequential={"looks": 2}, simulation={"reps": 1000}))
    assert data["sequential"]["fixed_n_per_group"] == fixed.n_per_group != sample_size(
        "log-rank", hr=0.5, event_probability=0.8).n_per_group


def test_designs_too_large_to_simulate_keep_the_formula_and_say_so(tmp_path):
    # hr 0.95 needs about 12,000 events (Schoenfeld 1983, common practice); simulating 20,000 trials of
    # that size per candidate n would hold check for minutes, and at this size the formula's error is small
    from registry.power.verify import SIMULATION_BUDGET

    formula = sample_size("log-rank", hr=0.95, event_probability=0.5)
    assert formula.n_total * 20_000 > SIMULATION_BUDGET
    result = verified_sample_size(design_from_params("log-rank", hr=0.95, event_probability=0.5))
    assert result.n_per_group == formula.n_per_group and result.label == "normal approximation"
    assert result.verification is None and result.notes[0].startswith("not verified by simulation")
    text = textwrap.dedent("""\
        id: small-hazard
        title: A small hazard ratio
        status: draft
        data_collection:
          start: 2028-01-01
        design:
          test: log-rank
          effect:
            hr: 0.95
            event_probability: 0.5
        sample_size:
          per_group: 12000
        """)
    path = tmp_path / "small-hazard.yaml"
    path.write_text(text, encoding="utf-8")
    report = check_file(SpecFile(path=path, display="small-hazard.yaml", root=tmp_path))
    notes = [f.message for f in report.findings if f.kind == "method-note"]
    assert report.sample.n_per_group == formula.n_per_group and report.verdict == "ok"
    assert any(note.startswith("not verified by simulation") for note in notes), notes


def test_power_at_a_size_too_large_to_simulate_is_the_formulas():
    from registry.power.verify import verified_power_at

    design = design_from_params("log-rank", hr=0.95, event_probability=0.5)
    at = verified_power_at(design, 12_000)
    assert at.verification is None and at.notes[0].startswith("not simulated")
    assert at.power == pytest.approx(power("log-rank", 12_000, hr=0.95, event_probability=0.5).power, rel=1e-12)
