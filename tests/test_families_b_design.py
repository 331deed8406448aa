"""Shared design blocks: clusters (design effect) and several primary outcomes (Bonferroni)."""

from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.power import TTestIndPower

from registry.checks import check_file
from registry.discovery import SpecFile
from registry.power import FAMILIES, InvalidDesign, design_from_params, get_family, power, sample_size
from registry.power.base import Cluster
from registry.power.simulate import simulated_power

#: One effect per family, for checks that hold whatever the family.
EXAMPLES = {
    "one-sample-t": dict(d=0.5),
    "paired-t": dict(d=0.5),
    "two-sample-t": dict(d=0.5),
    "log-rank": dict(hr=0.6, event_probability=0.7),
    "mann-whitney": dict(d=0.5),
    "signed-rank": dict(d=0.5),
    "equivalence-t": dict(margin=0.5, sd=1.0),
    "noninferiority-t": dict(margin=0.5, sd=1.0),
}
TWO_GROUP = [f.name for f in FAMILIES if f.groups >= 2 and f.name in EXAMPLES]
ONE_GROUP = [f.name for f in FAMILIES if f.groups == 1 and f.name in EXAMPLES]
CLUSTER = {"size": 10, "icc": 0.05}


def test_design_effect():
    # Donner & Klar (2000) ch. 5: design effect 1 + (m - 1) rho; m = 10, rho = 0.05 gives 1.45 (from memory)
    assert Cluster(size=10, icc=0.05).design_effect == pytest.approx(1.45)
    assert Cluster(size=25, icc=0.0).design_effect == 1.0


def _cluster_means_power(d, k, m, icc, alpha=0.05):
    """Two-sided pooled t-test on k cluster means per group: scipy.stats.nct with df 2k - 2 and
    ncp d / sqrt((icc + (1 - icc) / m) 2 / k) (Donner & Klar 2000, ch. 5, from memory)."""
    df, ncp = 2 * k - 2, d / math.sqrt((icc + (1 - icc) / m) * 2 / k)
    crit = stats.t.isf(alpha / 2, df)
    return stats.nct.sf(crit, df, ncp) + stats.nct.cdf(-crit, df, ncp)


def test_clustered_two_sample_t_is_sized_on_cluster_means():
    # 11 clusters of 10 per group reach 0.80 on cluster means (scipy.stats.nct), 10 do not.
    result = sample_size("two-sample-t", d=0.5, cluster=CLUSTER)
    assert _cluster_means_power(0.5, 11, 10, 0.05) >= 0.8 > _cluster_means_power(0.5, 10, 10, 0.05)
    assert result.n_per_group == 110 and result.group_sizes == (110, 110)
    assert result.clusters_per_group == (11, 11)
    assert (result.enrolment_per_group, result.enrolment_total) == (110, 220)
    assert result.achieved_power == pytest.approx(_cluster_means_power(0.5, 11, 10, 0.05), rel=1e-9)
    assert result.design_effect == pytest.approx(1.45)
    assert result.label == "exact"
    assert any("cluster means" in note for note in result.notes)


def test_size_names_the_whole_clusters(run):
    # 11 clusters of 10 per group (the test above); with attrition the enrol line names them instead
    line = next(row for row in run("size", "two-sample-t", "--d", "0.5", "--cluster-size", "10",
                                   "--cluster-icc", "0.05").out.splitlines() if "analysable" in row)
    assert line.split(None, 1)[1] == "110 per group x 2 groups = 220 in total (11 clusters of 10 per group)"
    out = run("size", "two-sample-t", "--d", "0.5", "--cluster-size", "10", "--cluster-icc", "0.05",
              "--attrition", "0.1").out
    assert "clusters of 10 per group)" not in next(row for row in out.splitlines() if "analysable" in row)
    assert "13 clusters of 10" in next(row for row in out.splitlines() if row.strip().startswith("enrol"))


def test_design_effect_note_shows_the_unequal_size_formula():
    # Eldridge, Ashby & Kerry (2006): DE = 1 + ((1 + cv^2) m - 1) icc, from memory; m 10, icc 0.05,
    # cv 0.5: 1 + 11.5 x 0.05 = 1.575 (the note used to print the equal-size formula beside this value)
    result = sample_size("mann-whitney", d=0.5, cluster={"size": 10, "icc": 0.05, "size_cv": 0.5})
    note = next(n for n in result.notes if n.startswith("randomised in clusters"))
    assert "design effect 1 + ((1 + 0.5^2) x 10 - 1) x 0.05 = 1.575" in note
    assert "coefficient of variation 0.5" in note


def test_cluster_then_attrition_order():
    # documented order for a design-effect family: n x DE, then / (1 - attrition), then whole clusters
    plain = sample_size("mann-whitney", d=0.5).n_per_group
    result = sample_size("mann-whitney", d=0.5, cluster=CLUSTER, attrition=0.1)
    analysable = math.ceil(plain * 1.45 - 1e-9)
    assert result.n_per_group == analysable
    assert result.clusters_per_group == (math.ceil(math.ceil(analysable / 0.9 - 1e-9) / 10),) * 2
    assert result.label == "design-effect approximation"


def test_unequal_allocation_gives_clusters_per_group():
    result = sample_size("two-sample-t", d=0.5, cluster=CLUSTER, ratio=2.0)
    n1, n2 = result.group_sizes
    assert n2 == math.ceil(2 * n1)
    assert result.clusters_per_group == (math.ceil(n1 / 10), math.ceil(n2 / 10))


@pytest.mark.parametrize("test", [t for t in TWO_GROUP if not get_family(t).cluster_means])
def test_cluster_works_for_every_two_group_family(test):
    params = EXAMPLES[test]
    plain = sample_size(test, **params)
    clustered = sample_size(test, **params, cluster=CLUSTER)
    assert clustered.individual_n_per_group == plain.n_per_group
    assert clustered.n_per_group == math.ceil(plain.n_per_group * 1.45 - 1e-9)
    assert clustered.enrolment_per_group % 10 == 0
    # power at the clustered n meets the target, one unit fewer does not
    n = clustered.n_per_group
    at = power(test, n, **params, cluster=CLUSTER)
    assert at.power >= 0.8 > power(test, n - 1, **params, cluster=CLUSTER).power
    assert at.effective_n_per_group == plain.n_per_group


def test_zero_icc_on_cluster_means_costs_only_degrees_of_freedom():
    # With icc 0 the k cluster means of m units carry all the information of k m units, on 2k - 2 df.
    plain = sample_size("two-sample-t", d=0.5)
    clustered = sample_size("two-sample-t", d=0.5, cluster={"size": 6, "icc": 0.0})
    k = clustered.clusters_per_group[0]
    assert _cluster_means_power(0.5, k, 6, 0.0) >= 0.8 > _cluster_means_power(0.5, k - 1, 6, 0.0)
    assert plain.n_per_group <= clustered.n_per_group == 6 * k <= plain.n_per_group + 12


def test_few_clusters_reach_the_target_in_a_simulation_of_the_cluster_means_analysis():
    # Large clusters and a large effect: the design effect alone asks for 3 clusters of 20 per group
    # (power 0.75 on cluster means); the cluster-means answer holds in a seeded simulation of random
    # cluster effects analysed with scipy.stats.ttest_ind on the means, and one cluster fewer does not.
    cluster = {"size": 20, "icc": 0.2}
    result = sample_size("two-sample-t", d=1.2, cluster=cluster)
    k = result.clusters_per_group[0]
    old = math.ceil(math.ceil(sample_size("two-sample-t", d=1.2).n_per_group * 4.8 - 1e-9) / 20)
    assert old < k
    rng = np.random.default_rng(7)
    reps = 20000

    def simulated(k):
        icc, m = 0.2, 20
        between = rng.normal(0, math.sqrt(icc), (reps, 2, k))
        within = rng.normal(0, math.sqrt(1 - icc), (reps, 2, k, m)).mean(axis=3)
        means = between + within
        means[:, 1] += 1.2
        return float(np.mean(stats.ttest_ind(means[:, 1], means[:, 0], axis=1).pvalue < 0.05))

    se = math.sqrt(0.8 * 0.2 / reps)
    assert simulated(k) > 0.8 - 2 * se
    assert simulated(k - 1) < 0.8 - 3 * se
    assert abs(simulated(k) - result.achieved_power) < 4 * se


def test_unequal_cluster_sizes_inflate_the_variance_of_cluster_means():
    equal = sample_size("two-sample-t", d=0.5, cluster=CLUSTER)
    varying = sample_size("two-sample-t", d=0.5, cluster={**CLUSTER, "size_cv": 0.6})
    assert varying.clusters_per_group[0] > equal.clusters_per_group[0]
    assert varying.label == "approximation for unequal cluster sizes"
    # Eldridge, Ashby & Kerry (2006): design effect 1 + ((1 + cv^2) m - 1) icc = 1 + (13.6 - 1) 0.05 (from memory)
    assert varying.design_effect == pytest.approx(1.63)


def test_cluster_scales_events():
    # Schoenfeld (1983) events 4 (z_a + z_b)^2 / log(hr)^2 (scipy quantiles), times the design effect
    events = 4 * (stats.norm.isf(0.025) + stats.norm.ppf(0.8)) ** 2 / math.log(0.6) ** 2
    clustered = sample_size("log-rank", hr=0.6, event_probability=0.7, cluster=CLUSTER)
    assert clustered.events == math.ceil(events * 1.45)


@pytest.mark.parametrize("test", ONE_GROUP)
def test_cluster_is_refused_for_one_group_designs(test):
    with pytest.raises(InvalidDesign, match="one-group design"):
        sample_size(test, **EXAMPLES[test], cluster=CLUSTER)


@pytest.mark.parametrize(
    "cluster, message",
    [({"size": 10, "icc": 5}, "did you mean 0.05"), ({"size": 1, "icc": 0.1}, "at least 2"),
     ({"size": 10}, "icc"), ({"size": 10, "icc": 0.1, "rho": 0.1}, "rho")],
)
def test_bad_cluster_blocks_are_explained(cluster, message):
    with pytest.raises(InvalidDesign, match=message):
        sample_size("two-sample-t", d=0.5, cluster=cluster)


def test_clustered_simulation_is_refused_clearly():
    # Only the cluster-means t-test is simulated with clusters (normal outcomes, whole clusters).
    with pytest.raises(ValueError, match="not offered"):
        simulated_power(design_from_params("welch-t", difference=1.0, sd1=1.0, sd2=2.0, cluster=CLUSTER), 93, reps=10)
    with pytest.raises(ValueError, match="normal outcomes"):
        simulated_power(design_from_params("two-sample-t", d=0.5, cluster=CLUSTER), 93, reps=10, distribution="lognormal")
    assert simulated_power(design_from_params("two-sample-t", d=0.5, cluster=CLUSTER), 93, reps=10).reps == 10


@pytest.mark.parametrize("test", list(EXAMPLES))
@pytest.mark.parametrize("outcomes", [2, 3])
def test_bonferroni_is_alpha_over_k_for_every_family(test, outcomes):
    params = EXAMPLES[test]
    split = sample_size(test, **params, multiplicity={"outcomes": outcomes})
    direct = sample_size(test, **params, alpha=0.05 / outcomes)
    assert (split.n_per_group, split.achieved_power) == (direct.n_per_group, direct.achieved_power)
    assert split.alpha == 0.05 and split.alpha_per_test == pytest.approx(0.05 / outcomes)
    assert any("Holm" in note and "conservative" in note for note in split.notes)
    at = power(test, split.n_per_group, **params, multiplicity={"outcomes": outcomes})
    assert at.power == pytest.approx(split.achieved_power, rel=1e-12)


def test_bonferroni_against_statsmodels():
    # statsmodels TTestIndPower at alpha 0.05 / 2 (reference library)
    expected = math.ceil(TTestIndPower().solve_power(0.5, alpha=0.025, power=0.8))
    assert sample_size("two-sample-t", d=0.5, multiplicity={"outcomes": 2}).n_per_group == expected


def test_simulation_uses_the_per_test_alpha():
    split = design_from_params("two-sample-t", d=0.5, multiplicity={"outcomes": 2})
    direct = design_from_params("two-sample-t", d=0.5, alpha=0.025)
    assert simulated_power(split, 40, reps=2000).power == simulated_power(direct, 40, reps=2000).power


def test_multiplicity_with_cluster_and_attrition_compose():
    result = sample_size("two-sample-t", d=0.5, multiplicity={"outcomes": 2}, cluster=CLUSTER, attrition=0.2)
    k = result.clusters_per_group and result.n_per_group // 10
    assert _cluster_means_power(0.5, k, 10, 0.05, alpha=0.025) >= 0.8 > _cluster_means_power(0.5, k - 1, 10, 0.05,
                                                                                           alpha=0.025)
    assert result.n_per_group == 10 * k
    assert result.enrolment_per_group == 10 * math.ceil(math.ceil(10 * k / 0.8 - 1e-9) / 10)


def test_bad_multiplicity_is_explained():
    with pytest.raises(InvalidDesign, match="at least 2"):
        sample_size("two-sample-t", d=0.5, multiplicity={"outcomes": 1})
    with pytest.raises(InvalidDesign, match="bonferroni"):
        sample_size("two-sample-t", d=0.5, multiplicity={"outcomes": 2, "method": "sidak"})


def test_check_accepts_the_clustered_enrolment_and_flags_one_cluster_less(tmp_path):
    def spec(per_group):
        text = textwrap.dedent(f"""\
            id: litter-growth
            title: Maternal diet and pup growth, randomised by litter
            status: draft
            data_collection:
              start: 2027-03-01
            design:
              test: two-sample-t
              effect:
                d: 0.5
              cluster:
                size: 10
                icc: 0.05
              attrition: 0.1
            sample_size:
              per_group: {per_group}
            """)
        path = tmp_path / "litter-growth.yaml"
        path.write_text(text, encoding="utf-8")
        return check_file(SpecFile(path=path, display="litter-growth.yaml", root=tmp_path))

    enough = spec(130)  # 11 clusters of 10 analysed on cluster means, enrolled for 10% attrition: 13 clusters
    assert enough.verdict == "ok", [f.message for f in enough.findings]
    assert enough.sample.clusters_per_group == (13, 13)
    short = spec(120)
    assert short.verdict == "underpowered"
    assert np.isclose(short.sample.design_effect, 1.45)
