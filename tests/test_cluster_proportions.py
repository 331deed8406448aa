"""Clustered two proportions: the pooled t-test on the cluster proportions, its formula and its simulation.

The analysis is the standard cluster-level one (Hayes, R. J. & Moulton, L. H. (2017). *Cluster
Randomised Trials*, 2nd ed., ch. 9; Donner, A. & Klar, N. (2000). *Design and Analysis of Cluster
Randomization Trials in Health Research*): one proportion per cluster, compared between the groups
with the pooled two-sample t-test. The references below are independent of prespec's simulator:
scipy's beta-binomial moments, scipy's t-test on every replicate, seeded plain-numpy simulations,
the noncentral t from scipy.stats, and an exact enumeration of the t-test on 0/1 outcomes.
"""

from __future__ import annotations

import math
import textwrap
import warnings

import numpy as np
import pytest
from scipy import stats

from registry.power import InfeasibleDesign, design_from_params, power, sample_size
from registry.power.base import Cluster
from registry.power.simulate import simulated_power
from registry.power.streams import UnitStreams
from registry.power.two_proportions import TwoProportions, cohens_h
from registry.power.verify import needs_verification, verified_sample_size

FAMILY = TwoProportions()
REPS = 10_000  # standard error 0.004 at power 0.8


class _Recorder:
    """A UnitStreams that keeps every draw the simulator makes, with the arguments it was made with."""

    def __init__(self, seed: int, reps: int) -> None:
        self._streams = UnitStreams(seed, 0, reps)
        self.draws: list[tuple[str, tuple, np.ndarray]] = []

    def __getattr__(self, name):
        method = getattr(self._streams, name)

        def draw(*args, **kwargs):
            out = method(*args, **kwargs)
            self.draws.append((name, args, out))
            return out

        return draw


def _design(p1=0.3, p2=0.5, size=8, icc=0.1, size_cv=0.0, **extra):
    return design_from_params("two-proportions", p1=p1, p2=p2,
                              cluster={"size": size, "icc": icc, "size_cv": size_cv}, **extra)


def _counts(recorder: _Recorder) -> list[tuple[np.ndarray, np.ndarray]]:
    """(units, count) of each group's clusters, as the simulator drew them."""
    return [(np.asarray(args[0]), out) for name, args, out in recorder.draws if name == "binomial"]


def _scipy_decisions(control: np.ndarray, treated: np.ndarray, alpha: float, alternative: str) -> np.ndarray:
    """scipy's pooled t-test on each replicate's cluster proportions, one call per replicate; a
    replicate without a p-value (every proportion equal) is not rejected."""
    out = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        for c, t in zip(control, treated):
            p = stats.ttest_ind(t, c, equal_var=True, alternative=alternative).pvalue
            out.append(bool(p < alpha))  # nan < alpha is False
    return np.array(out)


def _reference_power(p1, p2, m, icc, k1, k2, reps, seed, alpha=0.05, alternative="two-sided", size_cv=0.0):
    """Seeded plain-numpy simulation of the analysis: beta-distributed cluster probabilities with
    a + b = (1 - icc) / icc, binomial counts, scipy's pooled t-test on the proportions."""
    rng = np.random.default_rng(seed)

    def proportions(p, k):
        if size_cv > 0:
            shape = 1 / size_cv**2
            sizes = np.maximum(1, np.rint(rng.gamma(shape, m / shape, size=(reps, k)))).astype(int)
        else:
            sizes = np.full((reps, k), m)
        chance = rng.beta(p * (1 - icc) / icc, (1 - p) * (1 - icc) / icc, size=(reps, k)) if icc > 0 else p
        return rng.binomial(sizes, chance) / sizes

    control, treated = proportions(p1, k1), proportions(p2, k2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        p = stats.ttest_ind(treated, control, axis=1, alternative=alternative).pvalue
    return float(np.mean(p < alpha))


# ---------------------------------------------------------------- the simulator


@pytest.mark.parametrize("p, size, icc", [(0.3, 8, 0.1), (0.7, 20, 0.3), (0.1, 5, 0.0)])
def test_simulated_counts_are_beta_binomial(p, size, icc):
    # scipy.stats.betabinom(m, a, b) with a = p (1 - icc) / icc, b = (1 - p)(1 - icc) / icc has mean m p
    # and variance m p q (1 + (m - 1) icc) (the beta-binomial model of clustered binary data); icc 0 is
    # scipy.stats.binom(m, p). 2,000 replicates of 10 clusters: 20,000 clusters.
    design = _design(p1=p, p2=0.5 if p != 0.5 else 0.6, size=size, icc=icc)
    recorder = _Recorder(3, 2000)
    FAMILY.simulate_clusters(design, 10, 2000, recorder)
    units, counts = _counts(recorder)[0]
    assert (units == size).all() and counts.shape == (2000, 10)
    reference = (stats.betabinom(size, p * (1 - icc) / icc, (1 - p) * (1 - icc) / icc) if icc > 0
                 else stats.binom(size, p))
    mean, var = reference.mean(), reference.var()
    assert var == pytest.approx(size * p * (1 - p) * (1 + (size - 1) * icc), rel=1e-9)
    assert abs(counts.mean() - mean) < 4 * math.sqrt(var / counts.size)
    # the variance of a sample variance of 20,000 draws is about (kurtosis) 2 var^2 / N: 5 % is > 5 SE
    assert counts.var() == pytest.approx(var, rel=0.05)
    if icc > 0:  # the intracluster correlation of the 0/1 outcomes, from the count variance
        observed = (counts.var() / (size * p * (1 - p)) - 1) / (size - 1)
        assert observed == pytest.approx(icc, abs=0.03)


@pytest.mark.parametrize("alternative, p1, p2, size_cv", [
    ("two-sided", 0.3, 0.5, 0.0), ("greater", 0.3, 0.5, 0.0), ("less", 0.5, 0.3, 0.0), ("two-sided", 0.2, 0.4, 0.7),
])
def test_each_replicate_is_decided_by_scipys_pooled_t_test_on_the_proportions(alternative, p1, p2, size_cv):
    # The recorded counts and cluster sizes of 300 replicates, analysed one replicate at a time with
    # scipy.stats.ttest_ind (group 2 minus group 1, the design's alternative): the same decisions.
    design = _design(p1=p1, p2=p2, size=6, icc=0.15, size_cv=size_cv, alternative=alternative)
    recorder = _Recorder(11, 300)
    decisions = FAMILY.simulate_clusters(design, 5, 300, recorder)
    (units1, x1), (units2, x2) = _counts(recorder)
    if size_cv > 0:
        assert len(np.unique(units1)) > 3 and units1.min() >= 1
    expected = _scipy_decisions(x1 / units1, x2 / units2, design.alpha, alternative)
    assert decisions.dtype == bool and (decisions == expected).all()
    assert 0.05 < decisions.mean() < 0.95  # both kinds of decision occur: the comparison means something


def test_replicates_without_variance_are_not_rejected():
    # Rare outcomes in 2 clusters of 2 per group: many replicates have every proportion 0. scipy gives
    # them no p-value (nan); they count as not rejected. A replicate whose groups are each constant but
    # differ (0, 0 against 1, 1) has an infinite t and is rejected.
    design = _design(p1=0.05, p2=0.6, size=2, icc=0.0)
    recorder = _Recorder(5, 2000)
    decisions = FAMILY.simulate_clusters(design, 2, 2000, recorder)
    (_, x1), (_, x2) = _counts(recorder)
    both = np.concatenate([x1, x2], axis=1)
    constant = both.min(axis=1) == both.max(axis=1)
    assert constant.sum() > 20 and not decisions[constant].any()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        assert np.isnan(stats.ttest_ind(x2[constant] / 2, x1[constant] / 2, axis=1).pvalue).all()
    separated = (x1 == 0).all(axis=1) & (x2 == 2).all(axis=1)
    assert separated.sum() > 20 and decisions[separated].all()


@pytest.mark.parametrize("p1, p2, size, icc, size_cv, k, alternative", [
    (0.3, 0.5, 8, 0.1, 0.0, 10, "two-sided"),
    (0.1, 0.3, 5, 0.0, 0.0, 6, "greater"),
    (0.4, 0.2, 12, 0.2, 0.5, 8, "less"),
])
def test_simulated_power_agrees_with_an_independent_seeded_simulation(p1, p2, size, icc, size_cv, k, alternative):
    # Two simulations of the same model from unrelated random numbers: prespec's (common random numbers,
    # blocks of replicates) and a plain numpy one; their difference has SE sqrt(2 p q / reps).
    reps = 4000
    design = _design(p1=p1, p2=p2, size=size, icc=icc, size_cv=size_cv, alternative=alternative)
    ours = simulated_power(design, k * size, reps=reps, seed=8).power
    theirs = _reference_power(p1, p2, size, icc, k, k, reps, seed=2031, alternative=alternative, size_cv=size_cv)
    p = (ours + theirs) / 2
    assert abs(ours - theirs) < 4 * math.sqrt(2 * p * (1 - p) / reps)


def test_simulation_is_reproducible_and_shares_its_first_clusters_across_n():
    design = _design()
    assert simulated_power(design, 80, reps=600, seed=4).power == simulated_power(design, 80, reps=600, seed=4).power
    small, large = _Recorder(4, 600), _Recorder(4, 600)
    FAMILY.simulate_clusters(design, 10, 600, small)
    FAMILY.simulate_clusters(design, 14, 600, large)
    for (_, a), (_, b) in zip(_counts(small), _counts(large)):
        assert (a == b[:, :10]).all()  # common random numbers: the experiment at 14 extends the one at 10


# ---------------------------------------------------------------- the formula


@pytest.mark.parametrize("p1, p2, size, icc, size_cv, k1, ratio, alpha, alternative", [
    (0.3, 0.5, 8, 0.1, 0.0, 20, 1.0, 0.05, "two-sided"),
    (0.3, 0.7, 10, 0.1, 0.0, 5, 1.0, 0.05, "two-sided"),
    (0.1, 0.25, 6, 0.05, 0.0, 30, 2.0, 0.05, "greater"),
    (0.6, 0.35, 20, 0.3, 0.5, 9, 1.5, 0.01, "less"),
])
def test_cluster_power_is_the_noncentral_t_of_the_cluster_proportions(p1, p2, size, icc, size_cv, k1, ratio, alpha,
                                                                      alternative):
    # By hand with scipy.stats.nct and scipy.stats.t: cluster proportions of variance
    # p (1 - p)(icc + (1 - icc)(1 + cv^2) / m), pooled over the groups with weights k - 1; ncp
    # (p2 - p1) / sqrt(s^2 (1/k1 + 1/k2)) on k1 + k2 - 2 df (Donner & Klar 2000; Hayes & Moulton 2017,
    # ch. 9, from memory).
    design = _design(p1=p1, p2=p2, size=size, icc=icc, size_cv=size_cv, allocation_ratio=ratio, alpha=alpha,
                     alternative=alternative)
    k2 = math.ceil(ratio * k1 - 1e-9)
    share = icc + (1 - icc) * (1 + size_cv**2) / size
    s2 = ((k1 - 1) * p1 * (1 - p1) + (k2 - 1) * p2 * (1 - p2)) / (k1 + k2 - 2) * share
    df, ncp = k1 + k2 - 2, (p2 - p1) / math.sqrt(s2 * (1 / k1 + 1 / k2))
    if alternative == "two-sided":
        crit = stats.t.isf(alpha / 2, df)
        expected = stats.nct.sf(crit, df, ncp) + stats.nct.cdf(-crit, df, ncp)
    elif alternative == "greater":
        expected = stats.nct.sf(stats.t.isf(alpha, df), df, ncp)
    else:
        expected = stats.nct.cdf(-stats.t.isf(alpha, df), df, ncp)
    got = FAMILY.cluster_power(design, np.array([k1]), cohens_h(p1, p2))[0]
    assert got == pytest.approx(expected, rel=1e-9)
    # power at n = k1 m units is the same number through the public interface
    assert power("two-proportions", k1 * size, p1=p1, p2=p2, allocation_ratio=ratio, alpha=alpha,
                 alternative=alternative,
                 cluster={"size": size, "icc": icc, "size_cv": size_cv}).power == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize("p1, p2, size, icc", [(0.3, 0.4, 10, 0.05), (0.2, 0.3, 4, 0.2), (0.5, 0.57, 25, 0.02)])
def test_many_clusters_reduce_to_the_design_effect(p1, p2, size, icc):
    # With many clusters the t on the cluster proportions is the individual-level z test at
    # k m / DE units per group, DE = 1 + (m - 1) icc (Donner & Klar 2000, ch. 5; from memory): the two
    # powers differ only by the df and the pooled-under-H0 variance of Fleiss' formula. k: the clusters
    # the design effect asks for, so the powers are near 0.8.
    design = _design(p1=p1, p2=p2, size=size, icc=icc)
    de = 1 + (size - 1) * icc
    plain = design_from_params("two-proportions", p1=p1, p2=p2)
    k = math.ceil(FAMILY.approximate_n(plain, cohens_h(p1, p2)) * de / size)
    assert k >= 40
    clustered = FAMILY.cluster_power(design, np.array([k]), cohens_h(p1, p2))[0]
    individual = FAMILY.formula_power(plain, np.array([k * size / de]))[0]
    assert 0.8 < individual < 0.83
    assert clustered == pytest.approx(individual, abs=0.01)


def _t_test_on_outcomes_exact(p1, p2, n, alpha=0.05):
    """Exact power of scipy's pooled t-test on n independent 0/1 outcomes per group: every pair of
    counts (x1, x2) is one data set, with binomial probability; a data set without variance is not
    rejected."""
    x1, x2 = np.meshgrid(np.arange(n + 1), np.arange(n + 1), indexing="ij")
    x1, x2 = x1.ravel(), x2.ravel()
    units = np.arange(n)
    control = (units[None, :] < x1[:, None]).astype(float)  # x1 ones, the rest zeros
    treated = (units[None, :] < x2[:, None]).astype(float)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        p = stats.ttest_ind(treated, control, axis=1).pvalue
    weight = stats.binom.pmf(x1, n, p1) * stats.binom.pmf(x2, n, p2)
    return float(np.sum(weight[p < alpha]))


def test_one_unit_per_cluster_without_correlation_is_the_t_test_on_the_outcomes():
    # icc 0 and clusters of 1 (below what a spec may say: clusters have at least 2 units, so the block
    # is built without validation): each cluster proportion is one 0/1 outcome, and the simulated test
    # is scipy's t-test on the individual outcomes, whose exact power is an enumeration of the tables.
    design = _design(p1=0.3, p2=0.6).model_copy(
        update={"cluster": Cluster.model_construct(size=1, icc=0.0, size_cv=0.0)})
    n = 40
    exact = _t_test_on_outcomes_exact(0.3, 0.6, n)
    simulated = simulated_power(design, n, reps=REPS, seed=12)
    assert abs(simulated.power - exact) < 3.5 * simulated.standard_error
    # the formula is the normal-theory t of the same test: close, not equal
    assert FAMILY.cluster_power(design, np.array([n]), cohens_h(0.3, 0.6))[0] == pytest.approx(exact, abs=0.015)


# ---------------------------------------------------------------- the verified size


def test_verified_clusters_reach_the_target_and_one_fewer_does_not(tmp_path):
    # p1 0.3, p2 0.7, clusters of 10, icc 0.1. The design effect (1.9) alone asks for 5 clusters per
    # group; the simulated cluster-level test needs 6. An independent seeded simulation (plain numpy,
    # scipy's t-test) confirms both ends: at 6 clusters the power's 3-SE interval lies above 0.8 - 3 SE,
    # at 5 it lies wholly below the target.
    design = _design(p1=0.3, p2=0.7, size=10, icc=0.1)
    assert needs_verification(design)
    result = verified_sample_size(design, reps=4000, cache_dir=tmp_path)
    k = result.clusters_per_group[0]
    assert result.label == "simulation" and result.n_per_group == 10 * k and result.clusters_per_group == (k, k)
    assert result.achieved_power >= 0.8 > result.verification["power_below"]
    plain = sample_size("two-proportions", p1=0.3, p2=0.7).n_per_group
    by_design_effect = math.ceil(math.ceil(plain * 1.9 - 1e-9) / 10)
    assert (by_design_effect, k) == (5, 6)
    se = math.sqrt(0.8 * 0.2 / REPS)
    assert _reference_power(0.3, 0.7, 10, 0.1, k, k, REPS, seed=2027) > 0.8 - 3 * se
    assert _reference_power(0.3, 0.7, 10, 0.1, k - 1, k - 1, REPS, seed=2028) < 0.8 - 3 * se


@pytest.mark.parametrize("p1, p2, size, icc, size_cv, formula_k", [
    (0.2, 0.6, 20, 0.3, 0.0, 8),  # formula power 0.82 at 8 clusters; the test has about 0.785
    (0.3, 0.5, 8, 0.1, 0.6, 24),  # unequal sizes: formula 0.80 at 24 clusters; the test has about 0.77
])
def test_where_the_formula_promises_too_much_the_simulation_adds_clusters(tmp_path, p1, p2, size, icc, size_cv,
                                                                          formula_k):
    design = _design(p1=p1, p2=p2, size=size, icc=icc, size_cv=size_cv)
    formula = sample_size("two-proportions", p1=p1, p2=p2, cluster={"size": size, "icc": icc, "size_cv": size_cv})
    assert formula.clusters_per_group[0] == formula_k and formula.achieved_power > 0.8
    reps = 20_000
    se = math.sqrt(0.8 * 0.2 / reps)
    # an independent seed: at the formula's clusters the test falls short by more than 3 SE
    assert _reference_power(p1, p2, size, icc, formula_k, formula_k, reps, seed=41, size_cv=size_cv) < 0.8 - 3 * se
    result = verified_sample_size(design, reps=4000, cache_dir=tmp_path)
    assert result.clusters_per_group[0] > formula_k and result.start_n == formula_k * size
    assert "noncentral t on cluster proportions" in result.start_method


def test_few_large_clusters_are_simulated_within_the_budget(tmp_path):
    # Wells per plate: 400 units per cluster. The budget counts the clusters a simulated experiment
    # draws (one proportion each), not the units inside them, so the size is still verified.
    design = _design(p1=0.3, p2=0.5, size=400, icc=0.05)
    result = verified_sample_size(design, reps=20_000, cache_dir=tmp_path)
    assert result.label == "simulation" and result.clusters_per_group[0] < 10
    assert result.n_total * 20_000 > 20_000_000  # over the budget if it counted units


# ---------------------------------------------------------------- refusals and the command line


@pytest.mark.parametrize("effect, field", [({"method": "arcsine"}, "design.effect.method"),
                                           ({"continuity_correction": True}, "design.effect.continuity_correction")])
def test_z_test_settings_are_refused_with_a_cluster_block(effect, field):
    with pytest.raises(InfeasibleDesign, match="t-test on the cluster proportions") as caught:
        sample_size("two-proportions", p1=0.3, p2=0.5, cluster={"size": 8, "icc": 0.1}, **effect)
    assert caught.value.field == field
    assert sample_size("two-proportions", p1=0.3, p2=0.5, **effect).label == "exact"  # without clusters: fine


LITTERS = textwrap.dedent("""\
    id: litter-weaning
    title: Weaning success in two housing conditions, pups in litters
    status: draft
    data_collection:
      start: 2028-01-01
    design:
      test: two-proportions
      effect:
        p1: 0.3
        p2: 0.7{method}
      cluster:
        size: 10
        icc: 0.1
    sample_size:
      per_group: {planned}
    """)


def test_check_reports_the_simulated_cluster_level_size_without_a_design_effect_warning(tmp_path, run):
    (tmp_path / "litter-weaning.yaml").write_text(LITTERS.format(method="", planned=60), encoding="utf-8")
    spec = run("check", tmp_path, "--json").json()["specs"][0]
    kinds = {(f["kind"], f["field"]) for f in spec["findings"]}
    assert ("approximate-size", "design.cluster") not in kinds and "approximate-size" not in {k for k, _ in kinds}
    assert spec["required_per_group"] == 60 and spec["verdict"] == "ok"
    assert any("simulated power of the pooled two-sample t-test on the cluster proportions" in f["message"]
               for f in spec["findings"])
    # the design effect's 5 clusters are underpowered for the cluster-level test
    (tmp_path / "litter-weaning.yaml").write_text(LITTERS.format(method="", planned=50), encoding="utf-8")
    assert run("check", tmp_path, "--json").json()["specs"][0]["verdict"] == "underpowered"
    # the individual-level z-test settings are refused at their line
    (tmp_path / "litter-weaning.yaml").write_text(
        LITTERS.format(method="\n    method: arcsine", planned=60), encoding="utf-8")
    refused = run("check", tmp_path, "--json").json()["specs"][0]
    finding = next(f for f in refused["findings"] if f["kind"] == "invalid")
    assert finding["field"] == "design.effect.method" and "cluster proportions" in finding["message"]


def test_size_labels_the_cluster_level_simulation(run):
    argv = ("size", "two-proportions", "--p1", "0.3", "--p2", "0.7", "--cluster-size", "10", "--cluster-icc", "0.1",
            "--param", "simulation.reps=4000")
    data = run(*argv, "--json").json()
    assert data["label"] == "simulation" and data["clusters_per_group"] == [6, 6] and data["n_per_group"] == 60
    assert "noncentral t on cluster proportions" in data["start_method"]
    assert "t-test on the cluster proportions" in data["method"]
    text = " ".join(run(*argv).out.split())  # the terminal wraps long lines
    assert "analysed by the pooled two-sample t-test on the cluster proportions" in text
    assert "Hayes" in text and "design effect" in text


def test_a_size_too_large_to_simulate_keeps_the_formula_and_check_says_so(tmp_path, run, monkeypatch):
    # With the budget lowered to 1,000 simulated clusters, 20,000 replicates of the formula's 12 clusters
    # exceed it (as 20,000 replicates of 1,000 clusters would the real budget): the size is the formula's,
    # and check warns that it is unverified.
    from registry.power import verify

    monkeypatch.setattr(verify, "SIMULATION_BUDGET", 1000)
    (tmp_path / "litter-weaning.yaml").write_text(LITTERS.format(method="", planned=60), encoding="utf-8")
    spec = run("check", tmp_path, "--json").json()["specs"][0]
    warned = [f for f in spec["findings"] if f["kind"] == "approximate-size"]
    assert len(warned) == 1 and warned[0]["field"] == "design.test"
    assert "noncentral-t approximation" in warned[0]["message"] and "was not here" in warned[0]["message"]
    assert any("exceed prespec's budget" in f["message"] and "12 clusters" in f["message"] for f in spec["findings"])
    assert spec["required_per_group"] == 60  # the formula's 6 clusters of 10


# ---------------------------------------------------------------- fisher-exact randomised in clusters


def test_fisher_exact_in_clusters_is_analysed_and_sized_as_two_proportions_in_clusters(tmp_path):
    # Fisher's test on the pups would ignore the litters: a clustered fisher-exact design has the same
    # cluster-level analysis, so the same simulated size, as a clustered two-proportions design
    kwargs = {"p1": 0.3, "p2": 0.7, "cluster": {"size": 10, "icc": 0.1}}
    fisher = design_from_params("fisher-exact", **kwargs)
    proportions = design_from_params("two-proportions", **kwargs)
    assert needs_verification(fisher)
    a = verified_sample_size(fisher, reps=4000, cache_dir=tmp_path)
    b = verified_sample_size(proportions, reps=4000, cache_dir=tmp_path)
    assert (a.n_per_group, a.clusters_per_group, a.achieved_power) == (b.n_per_group, b.clusters_per_group,
                                                                       b.achieved_power)
    assert a.label == "simulation" and a.start_method == b.start_method
    # the same simulator and streams decide both
    assert simulated_power(fisher, 60, reps=2000, seed=5).power == simulated_power(proportions, 60, reps=2000,
                                                                                   seed=5).power
    assert any("Fisher's exact test on the units, which ignores the clusters, is not the analysis" in note
               for note in a.notes)
    assert "Hayes" in fisher.family.references(fisher) and "Fisher, R. A." in fisher.family.references(fisher)


def test_check_of_a_clustered_fisher_design_has_no_design_effect_warning(tmp_path, run):
    text = LITTERS.format(method="", planned=60).replace("test: two-proportions", "test: fisher-exact")
    (tmp_path / "litter-weaning.yaml").write_text(text, encoding="utf-8")
    spec = run("check", tmp_path, "--json").json()["specs"][0]
    assert "approximate-size" not in {f["kind"] for f in spec["findings"]}
    assert spec["required_per_group"] == 60 and spec["verdict"] == "ok"


def test_the_summary_says_how_many_clusters_are_needed(tmp_path, run):
    (tmp_path / "litter-weaning.yaml").write_text(LITTERS.format(method="", planned=60), encoding="utf-8")
    result = run("render", "litter-weaning", "--registry", tmp_path, "--no-history")
    assert result.status == 0, result.err
    text = " ".join(result.out.split())
    assert "At least 60 analysable units per group (6 clusters of 10 per group; 120 in total) are needed" in text
    assert "pooled two-sample t-test on the cluster proportions" in text
    # the z test's settings are not part of the effect a cluster-level analysis detects
    assert "The effect to detect is p1 of 0.3 and p2 of 0.7," in text and "method of pooled" not in text


def test_size_leaves_the_z_test_settings_out_of_a_clustered_effect(run):
    def effect_line(*extra: str) -> str:
        out = run("size", "two-proportions", "--p1", "0.3", "--p2", "0.5", *extra).out
        return next(row for row in out.splitlines() if row.strip().startswith("effect")).split(None, 1)[1]

    assert effect_line("--cluster-size", "8", "--cluster-icc", "0.1") == "h = 0.4115 (from p1 0.3, p2 0.5)"
    assert "method pooled" in effect_line()  # without clusters the z test's settings are the analysis's
