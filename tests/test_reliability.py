"""Tests for dossier.reliability and dossier.figures.reliability_chart: the calibration report.

Statistical checks compare a sample statistic with its analytic value within
4 of its standard errors (computed beside the check from the sample size):
a false failure is then rarer than about 1 in 10⁴ per check, and the seeds
are fixed, so a failure is a change of behaviour, not bad luck.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np
import pytest

from dossier import reliability as R
from dossier.errors import DossierError
from dossier.figures.reliability_chart import ReliabilityPoints, build_reliability_chart, reliability_alt

N_SE = 4.0
#: 2π/√1000 mas/yr: Δμ_orbit of a circular orbit for M = 1 Msun, ϖ = 1 mas, θ = 1″ (El-Badry, Rix & Heintz 2021,
#: MNRAS 506, 2269, who quote 0.44 for M = 5 Msun: 0.44/√5 = 0.1968, the same within their rounding).
ORBIT_1 = 0.198692
#: km/s per (mas/yr)/mas: 1 au per Julian year (common practice).
K_KMS = 4.74047


def _ref_bins(p: np.ndarray, n_bins: int = 10) -> np.ndarray:
    """Equal-width bins by the definition (common practice): floor(p · n), the last bin closed."""
    return np.minimum(np.floor(p * n_bins).astype(int), n_bins - 1)


# ---------------------------------------------------------------------------------------------------------
# The expected calibration error


def test_calibrated_sample_has_only_sampling_noise() -> None:
    """ECE of p ~ U(0, 1), truth ~ Bernoulli(p), N = 200 000, against its analytic sampling noise.

    Given the predictions, bin b's residual D_b = mean(p − y) has mean 0 and variance
    σ_b² = Σ p(1 − p) / n_b² (Bernoulli variance); with n_b ≈ 20 000 it is normal (central limit theorem),
    so E|D_b| = σ_b √(2/π) and Var|D_b| = σ_b² (1 − 2/π) (the half-normal distribution, from memory). The
    ECE Σ (n_b/N) |D_b| then has a mean and a variance summed over the independent bins.
    """
    rng = np.random.default_rng(11)
    n = 200_000
    p = rng.random(n)
    y = rng.random(n) < p
    b = _ref_bins(p)
    n_b = np.bincount(b, minlength=10).astype(float)
    var_b = np.bincount(b, weights=p * (1 - p), minlength=10) / n_b**2
    expected = float(np.sum(n_b / n * np.sqrt(var_b) * math.sqrt(2 / math.pi)))
    sd = float(np.sqrt(np.sum((n_b / n) ** 2 * var_b * (1 - 2 / math.pi))))

    ece = R.expected_calibration_error(p, y)
    assert ece < 0.01  # "near 0": four times below the target, and ...
    assert abs(ece - expected) < N_SE * sd  # ... exactly the noise a calibrated sample should show

    s = R.ece_summary(p, y, seed=5)
    assert s["ece"] == pytest.approx(ece, abs=1e-15)
    # The simulated calibrated classifier (same p, truth redrawn) is this very distribution: its mean over
    # 200 draws within 4 standard errors (sd/√200) of the analytic mean, its spread within 25 % (the sample
    # sd of 200 draws scatters by 1/√398 = 5 %, so 4σ is 20 %, plus the half-normal approximation).
    assert abs(s["calibrated_mean"] - expected) < N_SE * sd / math.sqrt(200) + 0.02 * expected
    assert s["calibrated_sd"] == pytest.approx(sd, rel=0.25)


def test_known_miscalibration_gives_one_sixth() -> None:
    """Truth ~ Bernoulli(p²) with p ~ U(0, 1): ECE → ∫₀¹ |p − p²| dp = 1/2 − 1/3 = 1/6.

    p − p² ≥ 0 on [0, 1], so no bin mixes signs and the binned sum equals the integral exactly (calculus).
    Its sampling noise: ECE is then the mean of p − y over the N pairs, of standard deviation
    std(p − y)/√N ≈ 0.0011 for N = 200 000; the tolerance is 4 of those.
    """
    rng = np.random.default_rng(12)
    n = 200_000
    p = rng.random(n)
    y = rng.random(n) < p**2
    expected = 0.5 - 1.0 / 3.0  # ∫₀¹ p dp − ∫₀¹ p² dp
    se = float(np.std(p - y) / math.sqrt(n))
    ece = R.expected_calibration_error(p, y)
    assert ece == pytest.approx(expected, abs=N_SE * se)

    # With every bin's residual of one sign, a bootstrap of the ECE is a bootstrap of the mean of p − y,
    # whose standard error is std/√N (Efron & Tibshirani 1993, "An Introduction to the Bootstrap", ch. 6,
    # from memory); 200 resamples pin it to about 5 %, so 20 % is 4σ.
    s = R.ece_summary(p, y, seed=2)
    assert s["bootstrap_error"] == pytest.approx(se, rel=0.2)
    assert s["beyond_noise"] is True
    assert s["calibrated_p95"] < 0.01  # the same predictions, calibrated, are far from 1/6


def test_bins_by_hand() -> None:
    """Six pairs in ten bins, worked by hand from the definition (common practice)."""
    p = np.array([0.05, 0.15, 0.12, 0.95, 1.0, 0.5])
    y = np.array([False, True, False, True, True, True])
    bins = R.reliability_bins(p, y, n_bins=10)
    np.testing.assert_allclose(bins["edges"], np.arange(11) / 10, atol=1e-15)
    assert bins["count"].tolist() == [1, 2, 0, 0, 0, 1, 0, 0, 0, 2]  # 0.5 opens bin 5; 1.0 closes bin 9
    assert bins["positives"].tolist() == [0, 1, 0, 0, 0, 1, 0, 0, 0, 2]
    occupied = [0, 1, 5, 9]
    np.testing.assert_allclose(bins["mean_predicted"][occupied], [0.05, 0.135, 0.5, 0.975], atol=1e-12)
    np.testing.assert_allclose(bins["observed_frequency"][occupied], [0.0, 0.5, 1.0, 1.0], atol=1e-12)
    empty = [2, 3, 4, 6, 7, 8]
    for key in ("mean_predicted", "observed_frequency", "interval_low", "interval_high"):
        assert np.all(np.isnan(bins[key][empty])), key
    # ECE = (1·0.05 + 2·|0.135 − 0.5| + 1·0.5 + 2·|0.975 − 1|) / 6 = 1.33 / 6
    assert R.expected_calibration_error(p, y) == pytest.approx(1.33 / 6, abs=1e-12)


def test_bins_refuse_nan_and_out_of_range() -> None:
    with pytest.raises(ValueError, match="Fix: drop NaN"):
        R.reliability_bins(np.array([0.2, np.nan]), np.array([True, False]))
    with pytest.raises(ValueError, match="within"):
        R.expected_calibration_error(np.array([1.2]), np.array([True]))


def test_wilson_interval_against_scipy() -> None:
    """The 68.27 % Wilson interval against scipy's BinomTestResult.proportion_ci(method='wilson')."""
    from scipy.stats import binomtest

    level = math.erf(1 / math.sqrt(2))  # ±1σ of a normal distribution
    cases = [(0, 1), (1, 1), (0, 7), (3, 7), (7, 7), (1, 40), (25, 40), (480, 1000), (9990, 10000)]
    k = np.array([c[0] for c in cases])
    n = np.array([c[1] for c in cases])
    low, high = R.wilson_interval(k, n)
    for i, (ki, ni) in enumerate(cases):
        ci = binomtest(ki, ni).proportion_ci(confidence_level=level, method="wilson")
        # Both are the same closed form in floating point: agreement to rounding error.
        assert low[i] == pytest.approx(ci.low, abs=1e-12), (ki, ni)
        assert high[i] == pytest.approx(ci.high, abs=1e-12), (ki, ni)
    empty_low, empty_high = R.wilson_interval(np.array([0]), np.array([0]))
    assert np.isnan(empty_low[0]) and np.isnan(empty_high[0])


# ---------------------------------------------------------------------------------------------------------
# The cut-based baseline


def _pairs(rows: list[dict]) -> dict[str, np.ndarray]:
    """Columns for the baseline from hand-made pairs; the companion due north, so ρ = Δδ exactly (geometry)."""
    base = {"plx1": 10.0, "plx2": 10.0, "eplx1": 0.05, "eplx2": 0.05, "rho": 10.0,
            "pmra1": 50.0, "pmdec1": -20.0, "dra": 0.0, "ddec": 0.0,
            "epmra1": 0.05, "epmra2": 0.05, "epmdec1": 0.05, "epmdec2": 0.05, "m1": 1.0, "m2": 1.0}
    full = [{**base, **r} for r in rows]
    col = lambda key: np.array([r[key] for r in full], dtype=float)  # noqa: E731
    return {
        "ra1": np.full(len(full), 10.0), "dec1": np.full(len(full), 20.0),
        "ra2": np.full(len(full), 10.0), "dec2": 20.0 + col("rho") / 3600.0,
        "parallax1": col("plx1"), "parallax_error1": col("eplx1"),
        "parallax2": col("plx2"), "parallax_error2": col("eplx2"),
        "pmra1": col("pmra1"), "pmra_error1": col("epmra1"), "pmdec1": col("pmdec1"), "pmdec_error1": col("epmdec1"),
        "pmra2": col("pmra1") + col("dra"), "pmra_error2": col("epmra2"),
        "pmdec2": col("pmdec1") + col("ddec"), "pmdec_error2": col("epmdec2"),
        "mass1": col("m1"), "mass2": col("m2"),
    }


def _orbit(mass: float, plx: float, rho: float) -> float:
    """Δμ_orbit (mas/yr), El-Badry, Rix & Heintz 2021, MNRAS 506, 2269."""
    return ORBIT_1 * math.sqrt(mass) * plx**1.5 / math.sqrt(rho)


def test_baseline_cuts_on_hand_made_pairs() -> None:
    """Each pair placed on one side of one cut of El-Badry, Rix & Heintz 2021 (the co-moving cut: common practice)."""
    sig = math.hypot(0.05, 0.05)  # σ_Δμ of a Δμ along one axis with 0.05 mas/yr per star and axis
    # Thresholds of the bound cut, Δμ_orbit + 2σ_Δμ, at ϖ = 10 mas, ρ = 100″:
    at_2 = _orbit(2.0, 10.0, 100.0) + 2 * sig  # 0.8886 + 0.1414 = 1.0300 (M = 2 Msun)
    at_06 = _orbit(0.6, 10.0, 100.0) + 2 * sig  # 0.4867 + 0.1414 = 0.6281 (M = 0.6 Msun)
    assert at_06 < 0.8 < at_2  # the pair of the NaN-mass check lies between them
    # σ_Δμ weights each axis's errors by that axis's share of Δμ: Δμ = 1.5 along (0.6, 0.8), errors 0.3 per
    # star in one axis and 0.05 in the other.
    sig_ra_loose = math.sqrt((0.3**2 * 2) * 0.6**2 + (0.05**2 * 2) * 0.8**2)  # 0.2608
    sig_dec_loose = math.sqrt((0.05**2 * 2) * 0.6**2 + (0.3**2 * 2) * 0.8**2)  # 0.3421
    orbit = _orbit(2.0, 10.0, 100.0)
    assert orbit + 2 * sig_ra_loose < 1.5 < orbit + 2 * sig_dec_loose
    # Inverse-variance mean parallax of 10 ± 0.05 and 5 ± 2 is 9.997 mas; Δμ = 9 mas/yr is then 4.27 km/s
    # (co-moving), whereas the plain mean 7.5 mas would give 5.69 km/s.
    w1, w2 = 1 / 0.05**2, 1 / 2.0**2
    plx_mean = (10 * w1 + 5 * w2) / (w1 + w2)
    assert K_KMS * 9 / plx_mean < 5 < K_KMS * 9 / 7.5
    assert 5 < 3 * math.hypot(0.05, 2.0)  # and their parallaxes agree within 3σ

    cases = [
        ("same parallax and motion", {}, "bound"),
        ("parallaxes 3.5σ apart, ρ > 4″: b = 3", {"plx2": 10.25}, "optical"),
        ("parallaxes 3.5σ apart, ρ < 4″: b = 6", {"plx2": 10.25, "rho": 3.0}, "bound"),
        ("Δμ 4 mas/yr at 100″: 1.9 km/s", {"rho": 100.0, "dra": 4.0}, "co-moving"),
        ("Δμ 20 mas/yr at 100″: 9.5 km/s", {"rho": 100.0, "dra": 20.0}, "optical"),
        ("mass missing: 2 Msun", {"rho": 100.0, "dra": 0.8, "m1": math.nan, "m2": 0.3}, "bound"),
        ("mass 0.6 Msun", {"rho": 100.0, "dra": 0.8, "m1": 0.3, "m2": 0.3}, "co-moving"),
        ("RA errors loose", {"rho": 100.0, "dra": 0.9, "ddec": 1.2, "epmra1": 0.3, "epmra2": 0.3}, "co-moving"),
        ("Dec errors loose", {"rho": 100.0, "dra": 0.9, "ddec": 1.2, "epmdec1": 0.3, "epmdec2": 0.3}, "bound"),
        ("inverse-variance parallax", {"rho": 100.0, "plx2": 5.0, "eplx2": 2.0, "dra": 9.0}, "co-moving"),
        ("parallax missing", {"plx2": math.nan}, "optical"),
        ("negative mean parallax", {"plx1": -1.0, "plx2": -1.0}, "optical"),
    ]
    got = R.baseline_classify(_pairs([c[1] for c in cases]))
    for (name, _, want), status in zip(cases, got):
        assert status == want, name


def test_separation_against_astropy() -> None:
    """The baseline's own separation against astropy's SkyCoord.separation (reference library)."""
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    ra1, dec1 = np.array([10.0, 200.0, 359.99]), np.array([20.0, -89.9, 0.0])
    ra2, dec2 = np.array([10.01, 20.0, 0.01]), np.array([20.003, -89.8, 0.001])
    want = SkyCoord(ra1 * u.deg, dec1 * u.deg).separation(SkyCoord(ra2 * u.deg, dec2 * u.deg)).arcsec
    np.testing.assert_allclose(R.separation_arcsec(ra1, dec1, ra2, dec2), want, rtol=1e-10)


# ---------------------------------------------------------------------------------------------------------
# Confusion with abstentions


def test_confusion_by_hand() -> None:
    """Eight pairs counted by hand: undetermined is an abstention; a chance pair is right when optical."""
    true = ["bound", "bound", "bound", "co-moving", "co-moving", "chance", "chance", "chance"]
    status = ["bound", "undetermined", "co-moving", "bound", "co-moving", "optical", "undetermined", "bound"]
    table = R.confusion(np.array(true), np.array(status))
    assert table["rows"] == ["bound", "co-moving", "chance"]
    assert table["columns"] == ["bound", "co-moving", "optical", "undetermined"]
    assert table["counts"] == {
        "bound": {"bound": 1, "co-moving": 1, "optical": 0, "undetermined": 1},
        "co-moving": {"bound": 1, "co-moving": 1, "optical": 0, "undetermined": 0},
        "chance": {"bound": 1, "co-moving": 0, "optical": 1, "undetermined": 1},
    }
    assert table["per_class"] == {
        "bound": {"total": 3, "correct": 1, "wrong": 1, "abstained": 1},
        "co-moving": {"total": 2, "correct": 1, "wrong": 1, "abstained": 0},
        "chance": {"total": 3, "correct": 1, "wrong": 1, "abstained": 1},
    }
    with pytest.raises(ValueError, match="unknown status 'maybe'. Fix: use one of"):
        R.confusion(np.array(["bound"]), np.array(["maybe"]))


# ---------------------------------------------------------------------------------------------------------
# The report and its folder


def _population(n: int = 400, seed: int = 4) -> dict[str, np.ndarray]:
    """A small screened-looking population: truth, probabilities, statuses and astrometry (invented)."""
    rng = np.random.default_rng(seed)
    cls = rng.choice(np.array(["bound", "co-moving", "chance"]), n, p=[0.3, 0.15, 0.55])
    physical = cls != "chance"
    p_phys = np.where(physical, rng.beta(6, 1, n), rng.beta(1, 6, n))
    p_bgp = np.where(cls == "bound", rng.beta(5, 1, n), rng.beta(1, 4, n))
    p_bgp[np.flatnonzero(physical)[:3]] = np.nan  # three physical pairs without P(bound | physical)
    status = np.where(p_phys > 0.8, np.where(p_bgp > 0.5, "bound", "co-moving"),
                      np.where(p_phys < 0.2, "optical", "undetermined"))
    ra, dec = rng.uniform(0, 360, n), rng.uniform(-60, 60, n)
    plx = rng.uniform(3, 20, n)
    out = {"pair_id": np.array([f"pair-{i}" for i in range(n)]), "true_class": cls, "p_physical": p_phys,
           "p_bound": p_phys * p_bgp, "p_bound_given_physical": p_bgp, "status": status,
           "ra1": ra, "dec1": dec, "ra2": ra + rng.uniform(-0.01, 0.01, n), "dec2": dec + rng.uniform(-0.01, 0.01, n)}
    spread = np.where(physical, 1.0, 20.0)
    for i in (1, 2):
        out[f"parallax{i}"] = plx + rng.normal(0, 0.05, n) * spread
        out[f"parallax_error{i}"] = np.full(n, 0.05)
        for axis in ("pmra", "pmdec"):
            out[f"{axis}{i}"] = rng.normal(0, 1, n) * spread
            out[f"{axis}_error{i}"] = np.full(n, 0.05)
        out[f"mass{i}"] = np.where(rng.random(n) < 0.1, np.nan, 1.0)
    return out


SETTINGS = {"length_scale_kpc": 0.25, "pair_model": {"prior": 1.5, "nothing": None}}


@pytest.fixture(scope="module")
def rep() -> dict:
    return R.report(_population(), settings_summary=SETTINGS, seed=9, n_primaries=150)


def _no_nan(text: str) -> dict:
    def refuse(name: str) -> None:
        raise AssertionError(f"{name} in the JSON")

    return json.loads(text, parse_constant=refuse)


def test_report_content(rep: dict) -> None:
    cols = _population()
    true = cols["true_class"]
    physical = true != "chance"
    assert rep["population"] == {"synthetic": True, "seed": 9, "primaries": 150, "pairs": 400,
                                 "by_class": {c: int(np.sum(true == c)) for c in R.TRUE_CLASSES}}
    assert rep["physical"]["used"] == 400 and rep["physical"]["skipped_nan"] == 0
    assert rep["bound_given_physical"]["pairs"] == int(physical.sum())
    assert rep["bound_given_physical"]["skipped_nan"] == 3
    # The ECE in the report is the function's, rounded to 6 significant figures.
    want = R.expected_calibration_error(cols["p_physical"], physical)
    assert rep["physical"]["ece"]["ece"] == pytest.approx(want, rel=1e-5)
    assert rep["undetermined"]["count"] == int(np.sum(cols["status"] == "undetermined"))
    ids = [t["id"] for t in rep["targets"]]
    assert ids == ["ece-physical", "ece-bound-given-physical", "undetermined", "wrong-bound", "wrong-co-moving",
                   "wrong-chance"]
    for t in rep["targets"][3:]:
        c = t["id"].removeprefix("wrong-")
        assert t["value"] == rep["confusion"]["model"]["per_class"][c]["wrong"]
        assert t["limit"] == rep["confusion"]["baseline"]["per_class"][c]["wrong"]
        assert t["met"] == (t["value"] <= t["limit"])
    assert rep["all_met"] == all(t["met"] for t in rep["targets"])
    assert rep["settings"] == SETTINGS
    _no_nan(R.dumps(rep))


def test_report_falls_back_to_ratio_of_probabilities() -> None:
    """Without p_bound_given_physical, P(bound | physical) = P(bound) / P(physical) (definition)."""
    cols = _population()
    with_column = R.report(cols, settings_summary={}, seed=9, n_primaries=150)
    cols.pop("p_bound_given_physical")
    without = R.report(cols, settings_summary={}, seed=9, n_primaries=150)
    a, b = with_column["bound_given_physical"], without["bound_given_physical"]
    assert a["bins"]["count"] == b["bins"]["count"]
    assert a["ece"]["ece"] == pytest.approx(b["ece"]["ece"], rel=1e-5)


def test_write_report_files_json_and_page(tmp_path: Path, rep: dict) -> None:
    out = tmp_path / "calibration"
    R.write_report(out, rep)
    assert sorted(p.name for p in out.iterdir()) == sorted(R.FILES)
    text = (out / "reliability.json").read_text(encoding="utf-8")
    assert _no_nan(text) == rep
    assert "NaN" not in text and "Infinity" not in text
    assert (out / "style.css").read_bytes() == (Path(R.__file__).parent.parent / "templates" / "assets"
                                                / "style.css").read_bytes()
    page = (out / "index.html").read_text(encoding="utf-8")
    assert "synthetic" in page and "own priors" in page and "not test whether those priors are right" in page
    assert '<th scope="col">' in page and '<th scope="row">' in page
    # Works offline: nothing is fetched or linked from elsewhere (the SVG's XML namespaces are names, not links).
    assert not re.search(r'(src|href|url)\s*[=(]\s*["\']?(https?:)?//', page)
    assert page.count("<svg") == 2 and page.count('role="img" aria-label="Reliability diagram of') == 2
    for t in rep["targets"]:
        assert t["name"] in page
    for name in ("reliability-physical.svg", "reliability-bound-given-physical.svg"):
        svg = (out / name).read_text(encoding="utf-8")
        assert svg.startswith("<svg") and "aria-label=" in svg


def test_write_report_is_deterministic(tmp_path: Path, rep: dict) -> None:
    again = R.report(_population(), settings_summary=SETTINGS, seed=9, n_primaries=150)
    assert R.dumps(again) == R.dumps(rep)
    R.write_report(tmp_path / "a", rep)
    R.write_report(tmp_path / "b", again)
    for name in R.FILES:
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes(), name


def test_write_report_replaces_a_previous_report(tmp_path: Path, rep: dict) -> None:
    out = tmp_path / "calibration"
    R.write_report(out, rep)
    (out / "stale.txt").write_text("from an older run", encoding="utf-8")
    R.write_report(out, rep)
    assert sorted(p.name for p in out.iterdir()) == sorted(R.FILES)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["calibration"]


def test_write_report_failure_leaves_old_folder_intact(tmp_path: Path, rep: dict,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    out = tmp_path / "calibration"
    R.write_report(out, rep)
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    def broken(*args, **kwargs):
        raise RuntimeError("disk full, say")

    # The JSON and both figures are written by then: a failure half-way through.
    monkeypatch.setattr(R, "render_page", broken)
    other = R.report(_population(seed=5), settings_summary=SETTINGS, seed=10, n_primaries=150)
    with pytest.raises(RuntimeError, match="disk full"):
        R.write_report(out, other)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["calibration"]  # no partial folder left


def test_write_report_refuses_other_folders(tmp_path: Path, rep: dict) -> None:
    out = tmp_path / "notes"
    out.mkdir()
    (out / "thesis.txt").write_text("keep me", encoding="utf-8")
    with pytest.raises(DossierError, match="not a calibration report.*Fix: choose a new or empty folder"):
        R.write_report(out, rep)
    assert [p.name for p in out.iterdir()] == ["thesis.txt"]


def test_jsonable_has_no_nan() -> None:
    value = R.jsonable({"a": np.float64("nan"), "b": [np.inf, 1 / 3], "c": np.int64(3), "d": np.bool_(True)})
    assert value == {"a": None, "b": [None, 0.333333], "c": 3, "d": True}


# ---------------------------------------------------------------------------------------------------------
# The figure


def test_chart_shows_the_bins_and_says_them(rep: dict) -> None:
    """The diagram's points are the report's occupied bins; its text alternative gives their numbers."""
    bins = rep["physical"]["bins"]
    points = ReliabilityPoints.from_report(bins)
    fig = build_reliability_chart(points, title="Reliability of P(physical)")
    diagram, histogram = fig.axes
    (container,) = [c for c in diagram.containers if c.get_label() == "observed"]
    x, y = container.lines[0].get_data()
    used = [i for i, n in enumerate(bins["count"]) if n > 0]
    np.testing.assert_allclose(x, [bins["mean_predicted"][i] for i in used])
    np.testing.assert_allclose(y, [bins["observed_frequency"][i] for i in used])
    (bars,) = [c for c in histogram.containers if c.get_label() == "count"]
    assert [b.get_height() for b in bars] == bins["count"]
    alt = reliability_alt(points, subject="P(physical)")
    assert f"for {sum(bins['count'])} pairs in 10 equal bins, {len(used)} of them occupied" in alt


def test_report_without_physical_pairs(tmp_path: Path) -> None:
    """No truly physical pair: P(bound | physical) has nothing to score; nulls, a failed target, a whole folder."""
    cols = _population(60, seed=6)
    cols["true_class"] = np.full(60, "chance")
    rep = R.report(cols, settings_summary={}, seed=1, n_primaries=20)
    block = rep["bound_given_physical"]
    assert block["used"] == 0 and block["bins"]["count"] == [0] * 10
    assert block["ece"]["ece"] is None and block["ece"]["beyond_noise"] is None
    assert next(t for t in rep["targets"] if t["id"] == "ece-bound-given-physical")["met"] is False
    R.write_report(tmp_path / "out", rep)
    assert "no bin holds a pair" in (tmp_path / "out" / "reliability-bound-given-physical.svg").read_text("utf-8")
