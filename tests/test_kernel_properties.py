"""Properties of the vectorised kernels, checked on inputs hypothesis draws.

What every kernel must do whatever the numbers: angles wrap into [0, 360),
results stay finite inside the documented domains, a kernel called on an array
gives each element what it gives that element alone (``weigh`` calls the
kernels with one pair, ``dossier screen`` with millions), and the symmetries
the physics has: the two stars of a pair may be named in either order, and a
binding likelihood ratio depends only on the size of the velocity difference.

References named beside each check: astropy as reference library for
separations and position angles; Napier's analogies of spherical trigonometry
for the convergence of meridians (Smart 1977, Textbook on Spherical Astronomy,
6th ed., CUP, ch. 1; from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from dossier.astro import binding
from dossier.astro.angles import separation_pa
from dossier.astro.distance import combine_parallaxes, edsd_mode, edsd_quantiles
from dossier.rules import chance_alignment, parallax_agreement, proper_motion_orbit, radial_velocity
from dossier.rules.base import OUTCOME_CODES

NAN = math.nan
SETTINGS = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
FEW = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def finite(lo: float, hi: float, **kw) -> st.SearchStrategy[float]:
    return st.floats(lo, hi, allow_nan=False, allow_infinity=False, **kw)


def positive(lo: float, hi: float) -> st.SearchStrategy[float]:
    """Log-uniform-ish positive numbers: hypothesis's floats between lo and hi, and powers of ten across."""
    return st.one_of(finite(lo, hi), finite(math.log10(lo), math.log10(hi)).map(lambda e: 10.0**e))


def maybe_missing(strategy: st.SearchStrategy[float]) -> st.SearchStrategy[float]:
    return st.one_of(strategy, strategy, strategy, st.just(NAN))


def wrap180(x):
    """An angle difference folded into [−180, 180)."""
    return (np.asarray(x) + 180.0) % 360.0 - 180.0


def same(a, b, rtol: float = 1e-12, what: str = "", atol: float = 0.0) -> None:
    """Equal to 1e-12 relative, or ``atol`` (NaN equals NaN; infinities and integers exactly)."""
    a, b = np.asarray(a), np.asarray(b)
    assert a.shape == b.shape, what
    if a.dtype.kind in "biu" or b.dtype.kind in "biu":
        np.testing.assert_array_equal(a, b, err_msg=what)
    else:
        np.testing.assert_allclose(a, b, rtol=rtol, atol=atol, equal_nan=True, err_msg=what)


def each_row_alone(kernel, columns: list[np.ndarray], **kw) -> dict[str, np.ndarray]:
    """A kernel's dict result built from one call per row."""
    rows = [kernel(*(c[i:i + 1] for c in columns), **kw) for i in range(columns[0].size)]
    return {k: np.concatenate([r[k] for r in rows]) for k in rows[0]}


# --- separation and position angle ------------------------------------------------------------

ra = finite(0.0, 360.0, exclude_max=True)
dec = finite(-90.0, 90.0)


@st.composite
def pairs(draw):
    """Two points on the sky: anywhere, or a double star (the second within a degree of the first)."""
    ra1, dec1 = draw(ra), draw(finite(-89.9, 89.9))
    if draw(st.booleans()):
        return ra1, dec1, draw(ra), draw(dec)
    rho_deg = 10 ** draw(finite(-6.5, 0.0))  # 1 mas to 1°
    theta = math.radians(draw(finite(0.0, 360.0)))
    dec2 = dec1 + rho_deg * math.cos(theta)
    ra2 = (ra1 + rho_deg * math.sin(theta) / math.cos(math.radians(dec1))) % 360.0
    return ra1, dec1, ra2, max(-90.0, min(90.0, dec2))


@SETTINGS
@given(st.lists(pairs(), min_size=1, max_size=20))
def test_separation_and_position_angle_agree_with_astropy(points):
    # Reference: astropy as reference library (SkyCoord.separation and SkyCoord.position_angle).
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    ra1, dec1, ra2, dec2 = np.array(points).T
    sep, pa = separation_pa(ra1, dec1, ra2, dec2)
    one, two = SkyCoord(ra1 * u.deg, dec1 * u.deg), SkyCoord(ra2 * u.deg, dec2 * u.deg)
    ref_sep, ref_pa = one.separation(two).arcsec, one.position_angle(two).deg
    np.testing.assert_allclose(sep, ref_sep, rtol=1e-12, atol=1e-9)
    # The position angle is defined away from coincident and antipodal points; near them it is only as good
    # as the separation's last digits allow (about 1e-9 deg / ρ″).
    defined = (ref_sep > 1e-3) & (ref_sep < 179.99 * 3600)
    tolerance = 1e-9 + 1e-7 / np.maximum(ref_sep, 1e-3)
    assert np.all(np.abs(wrap180(pa - ref_pa))[defined] <= tolerance[defined])


@SETTINGS
@given(st.lists(st.tuples(finite(-720.0, 720.0), dec, finite(-720.0, 720.0), dec), min_size=1, max_size=20))
def test_position_angle_wraps_into_0_360_and_everything_is_finite(points):
    # Convention (DESIGN.md): position angle north through east in [0, 360); separations between 0 and 180°.
    ra1, dec1, ra2, dec2 = np.array(points).T
    sep, pa = separation_pa(ra1, dec1, ra2, dec2)
    assert np.all(np.isfinite(sep)) and np.all(np.isfinite(pa))
    assert np.all((pa >= 0.0) & (pa < 360.0))
    assert np.all((sep >= 0.0) & (sep <= 180.0 * 3600.0 * (1 + 1e-15)))
    # Whole turns of right ascension change nothing (to the rounding of the larger angles).
    sep_turned, pa_turned = separation_pa(ra1 + 360.0, dec1, ra2 - 720.0, dec2)
    np.testing.assert_allclose(sep_turned, sep, rtol=1e-9, atol=1e-6)
    defined = (sep > 1.0) & (sep < 179.0 * 3600)
    assert np.all(np.abs(wrap180(pa_turned - pa))[defined] <= 1e-6)


def convergence_deg(ra1, dec1, ra2, dec2):
    """γ = θ21 − θ12 − 180°, the angle between the meridians of the two points.

    tan(γ/2) = tan(Δα/2) sin δ̄ / cos(Δδ/2), from Napier's analogies (Smart 1977, from memory).
    """
    dra = np.radians(wrap180(np.asarray(ra2) - ra1))
    mean, half = np.radians((np.asarray(dec1) + dec2) / 2), np.radians((np.asarray(dec2) - dec1) / 2)
    return 2 * np.degrees(np.arctan(np.tan(dra / 2) * np.sin(mean) / np.cos(half)))


@SETTINGS
@given(st.lists(pairs(), min_size=1, max_size=20))
def test_swapping_the_stars_keeps_rho_and_turns_theta_by_180_plus_the_convergence_of_meridians(points):
    # Seen from the other star, the position angle is turned by 180° and by the angle between the two stars'
    # meridians, γ (Napier's analogies; γ ≈ Δα sin δ for a close pair, so 0.2° for a 10″ pair at δ = 60°).
    ra1, dec1, ra2, dec2 = np.array(points).T
    sep12, pa12 = separation_pa(ra1, dec1, ra2, dec2)
    sep21, pa21 = separation_pa(ra2, dec2, ra1, dec1)
    np.testing.assert_allclose(sep21, sep12, rtol=1e-12, atol=1e-9)
    defined = (sep12 > 1e-3) & (sep12 < 179.0 * 3600) & (np.abs(wrap180(ra2 - ra1)) < 179.0)
    gamma = convergence_deg(ra1, dec1, ra2, dec2)
    tolerance = 1e-9 + 1e-7 / np.maximum(sep12, 1e-3)
    assert np.all(np.abs(wrap180(pa21 - pa12 - 180.0 - gamma))[defined] <= tolerance[defined])


@SETTINGS
@given(ra, finite(-89.9, 89.9), finite(-30.0, 30.0), st.booleans())
def test_swapping_the_stars_turns_theta_by_exactly_180_where_the_meridians_agree(ra1, dec1, offset, same_ra):
    # On one meridian (same RA), or placed symmetrically about the equator (δ₂ = −δ₁), the convergence of
    # meridians vanishes (γ = 0 above) and the two position angles differ by 180°.
    if same_ra:
        ra2, dec2 = ra1, max(-90.0, min(90.0, dec1 + offset))
    else:
        ra2, dec2 = (ra1 + offset) % 360.0, -dec1
    sep12, pa12 = separation_pa(ra1, dec1, ra2, dec2)
    sep21, pa21 = separation_pa(ra2, dec2, ra1, dec1)
    assume(sep12 > 1e-3)
    assert abs(float(wrap180(pa21 - pa12 - 180.0))) <= 1e-9 + 1e-7 / float(sep12)
    assert float(sep21) == pytest.approx(float(sep12), rel=1e-12, abs=1e-9)


@FEW
@given(st.lists(st.tuples(finite(-720.0, 720.0), dec, finite(-720.0, 720.0), dec), min_size=1, max_size=30))
def test_separation_pa_on_arrays_equals_each_pair_alone(points):
    ra1, dec1, ra2, dec2 = np.array(points).T
    sep, pa = separation_pa(ra1, dec1, ra2, dec2)
    alone = np.array([separation_pa(*p) for p in points])
    same(sep, alone[:, 0], what="separation")
    same(pa, alone[:, 1], what="position angle")


# --- binding likelihood ratios --------------------------------------------------------------

speed = positive(1e-3, 1e3)
binding_row = st.tuples(finite(0.0, 1e3), positive(1e-3, 1e2), speed, positive(1e-2, 1e2))
LN_LIMIT = proper_motion_orbit.LN_STRENGTH_LIMIT


@FEW
@given(st.lists(binding_row, min_size=1, max_size=12), st.sampled_from([None, LN_LIMIT]))
def test_binding_ratios_are_finite_and_on_arrays_equal_each_row_alone(rows, beyond):
    d, s, R, g = np.array(rows).T
    for kernel in (binding.log_lr_bound_planar, binding.log_lr_bound_line):
        together = kernel(d, s, R, g, beyond=beyond)
        alone = np.array([kernel(*row, beyond=beyond) for row in rows])
        same(together, alone, what=kernel.__name__)
        if beyond is None:  # without clipping every ratio is a number
            assert np.all(np.isfinite(together)), (kernel.__name__, rows)
        else:  # settled rows are ±inf, and only those beyond the limit
            assert not np.any(np.isnan(together))
            assert np.all(np.isfinite(together) | (np.abs(together) == np.inf))


@FEW
@given(st.lists(binding_row, min_size=1, max_size=12))
def test_line_of_sight_binding_ratio_depends_only_on_the_size_of_the_difference(rows):
    # Both models are symmetric in v → −v, so the measured difference counts by its size alone.
    d, s, R, g = np.array(rows).T
    for beyond in (None, LN_LIMIT):
        np.testing.assert_array_equal(binding.log_lr_bound_line(-d, s, R, g, beyond=beyond),
                                      binding.log_lr_bound_line(d, s, R, g, beyond=beyond))


@FEW
@given(binding_row)
def test_clipping_settles_only_rows_beyond_the_limit(row):
    # `beyond` may replace the quadratures only where the ratio is certainly past the limit (module docstring).
    for kernel in (binding.log_lr_bound_planar, binding.log_lr_bound_line):
        exact = float(kernel(*row))
        clipped = float(kernel(*row, beyond=LN_LIMIT))
        if math.isinf(clipped):
            assert math.copysign(1.0, clipped) * exact >= LN_LIMIT, (kernel.__name__, row, exact)
        else:
            assert clipped == exact, (kernel.__name__, row)


# --- distances --------------------------------------------------------------------------------

parallax = finite(-50.0, 200.0)
parallax_error = positive(1e-3, 50.0)
length_scale = positive(0.05, 10.0)


@SETTINGS
@given(st.lists(st.tuples(parallax, parallax_error, length_scale), min_size=1, max_size=12))
def test_edsd_mode_is_positive_finite_and_on_arrays_equals_each_row_alone(rows):
    w, s, L = np.array(rows).T
    mode = edsd_mode(w, s, L)
    assert np.all(np.isfinite(mode) & (mode > 0)), rows
    same(mode, np.array([edsd_mode(*row) for row in rows]), what="edsd_mode")


@FEW
@given(st.lists(st.tuples(parallax, parallax_error, length_scale), min_size=1, max_size=8))
def test_edsd_quantiles_increase_and_on_arrays_equal_each_row_alone(rows):
    w, s, L = np.array(rows).T
    q = edsd_quantiles(w, s, L, (0.16, 0.5, 0.84))
    assert q.shape == (len(rows), 3)
    assert np.all(np.isfinite(q) & (q > 0)), rows
    assert np.all(np.diff(q, axis=1) >= 0), rows
    same(q, np.array([edsd_quantiles(*row, (0.16, 0.5, 0.84)) for row in rows]), what="edsd_quantiles")


sources = st.lists(st.tuples(finite(-20.0, 100.0), positive(1e-3, 10.0)), min_size=1, max_size=6)


@SETTINGS
@given(st.lists(sources, min_size=1, max_size=8), st.randoms(use_true_random=False))
def test_combined_parallax_on_arrays_equals_each_star_alone_and_ignores_the_order_of_sources(stars, rnd):
    width = max(len(s) for s in stars)
    values = np.full((len(stars), width), NAN)
    errors = np.full((len(stars), width), NAN)
    for i, star in enumerate(stars):
        values[i, :len(star)], errors[i, :len(star)] = np.array(star).T
    together = combine_parallaxes(values, errors)
    for i, star in enumerate(stars):
        alone = combine_parallaxes(*np.array(star).T)
        for name in together._fields:
            got = getattr(together, name)[i]
            want = getattr(alone, name)
            if name == "residual_sigma":
                got = got[:len(star)]
            same(got, want, what=f"{name} of star {i}")
        # Finite, inside the values, never more precise than the best source, widened only by the Birge ratio.
        x, e = np.array(star).T
        slack = 1e-9 * np.abs(x).max()
        assert math.isfinite(alone.mean) and x.min() - slack <= alone.mean <= x.max() + slack
        assert alone.error <= e.min() * (1 + 1e-12) and alone.error_inflated >= alone.error
        # A weighted mean does not depend on the order in which the sources are listed.
        order = list(range(len(star)))
        rnd.shuffle(order)
        shuffled = combine_parallaxes(x[order], e[order])
        for name in ("mean", "error", "chi2", "p_value", "birge_ratio", "error_inflated"):
            np.testing.assert_allclose(getattr(shuffled, name), getattr(alone, name), rtol=1e-9, atol=1e-12,
                                       equal_nan=True, err_msg=name)
        # the leave-one-out mean is (Σ w x − w_i x_i) / (Σ w − w_i): summed in another order, its rounding moves by
        # ~1e-16 of the largest term, which a dominant source (a tiny error) makes ~1e-9 of a residual in σ
        same(shuffled.residual_sigma, alone.residual_sigma[order], rtol=1e-9, atol=1e-8, what="residual_sigma")


# --- the rules' kernels ----------------------------------------------------------------------------

parallax_row = st.tuples(maybe_missing(finite(-5.0, 100.0)), maybe_missing(positive(1e-3, 5.0)),
                         maybe_missing(finite(-5.0, 100.0)), maybe_missing(positive(1e-3, 5.0)),
                         maybe_missing(positive(1e-2, 1e4)))


@FEW
@given(st.lists(parallax_row, min_size=1, max_size=10))
def test_parallax_agreement_kernel_on_arrays_equals_each_pair_alone_and_ignores_which_star_is_first(rows):
    columns = list(np.array(rows).T)
    rule_settings = parallax_agreement.Settings()
    together = parallax_agreement.kernel(*columns, rule_settings, 1.35)
    alone = each_row_alone(parallax_agreement.kernel, columns, settings=rule_settings, length_scale_kpc=1.35)
    for key in together:
        same(together[key], alone[key], what=key)
    complete = np.all(np.isfinite(np.array(rows)[:, :4]), axis=1)
    assert np.all(np.isfinite(together["strength"][complete])) and np.all(np.isfinite(together["statistic"][complete]))
    # z = |Δϖ|/σ with σ² = σ₁² + σ₂², the depth allowance from the weighted mean parallax and the Bayes factor
    # treat the two stars alike (the rule's method, in its docstring); Δϖ changes sign.
    p1, e1, p2, e2, rho = columns
    swapped = parallax_agreement.kernel(p2, e2, p1, e1, rho, rule_settings, 1.35)
    for key in together:
        if key == "delta_parallax":
            same(swapped[key], -together[key], what=key)
        elif key == "strength":
            # log10 B = (ln N + ln m₀ − ln m₁ − ln m₂)/ln 10: swapping the stars reorders the subtraction, and the
            # ln m of a precise negative parallax runs into the thousands, so the rounding differs by ~1e-13
            same(swapped[key], together[key], what=key, atol=1e-9)
        else:
            same(swapped[key], together[key], what=key)


TABLE = {"table_magnitudes": np.array([9.0, 12.0, 15.0]), "table_densities": np.array([2.0, 40.0, 480.0]),
         "table_density_errors": np.array([0.3, 5.0, 50.0])}


@SETTINGS
@given(st.lists(st.tuples(maybe_missing(positive(1e-2, 1e3)), maybe_missing(finite(4.0, 20.0))), min_size=1,
                max_size=12))
def test_chance_alignment_kernel_on_arrays_equals_each_pair_alone_and_grows_with_separation(rows):
    rho, mag = np.array(rows).T
    rule_settings = chance_alignment.Settings()
    together = chance_alignment.kernel(rho, mag, rule_settings, **TABLE)
    alone = each_row_alone(chance_alignment.kernel, [rho, mag], settings=rule_settings, **TABLE)
    for key in together:
        same(together[key], alone[key], what=key)
    known = np.isfinite(rho) & np.isfinite(mag)
    p = together["p_chance"][known]
    assert np.all((p >= 0) & (p <= 1)) and np.all(np.isfinite(together["strength"][known]))
    # A wider pair has more room for a field star: P_chance = 1 − exp(−π ρ² Σ) grows with ρ
    # (Bloom, Kulkarni & Djorgovski 2002, AJ 123, 1111).
    wider = chance_alignment.kernel(rho * 2.0, mag, rule_settings, **TABLE)
    assert np.all(wider["p_chance"][known] >= p)


pm = finite(-500.0, 500.0)
pm_error = positive(1e-3, 5.0)
pm_row = st.tuples(*(maybe_missing(x) for x in (pm, pm_error, pm, pm_error, pm, pm_error, pm, pm_error,
                                                 positive(1e-2, 1e4), finite(-2.0, 200.0), positive(0.05, 50.0))))


@FEW
@given(st.lists(pm_row, min_size=1, max_size=10))
def test_proper_motion_orbit_kernel_on_arrays_equals_each_pair_alone_and_ignores_which_star_is_first(rows):
    columns = list(np.array(rows).T)
    rule_settings = proper_motion_orbit.Settings()
    together = proper_motion_orbit.kernel(*columns, settings=rule_settings)
    alone = each_row_alone(proper_motion_orbit.kernel, columns, settings=rule_settings)
    for key in together:
        same(together[key], alone[key], what=key)
    decided = together["outcome"] != OUTCOME_CODES["insufficient"]
    assert np.all(np.abs(together["strength"][decided]) <= 99)
    swapped = proper_motion_orbit.kernel(*columns[4:8], *columns[0:4], *columns[8:], settings=rule_settings)
    for key in together:
        same(swapped[key], together[key], what=key)


@FEW
@given(st.lists(st.tuples(pm, pm, pm, pm, pm_error, pm_error, positive(1e-2, 1e4), finite(0.1, 200.0),
                          positive(0.05, 50.0)), min_size=1, max_size=10))
def test_proper_motion_orbit_depends_only_on_the_size_of_the_motion_difference(rows):
    # With the same error on both axes, turning both proper motions by 90° on the sky (x, y) → (−y, x)
    # keeps |Δμ| and its uncertainty, so the verdict of the binding test cannot change.
    a, b, c, d, e1, e2, rho, plx, mass = np.array(rows).T
    rule_settings = proper_motion_orbit.Settings()
    first = proper_motion_orbit.kernel(a, e1, b, e1, c, e2, d, e2, rho, plx, mass, settings=rule_settings)
    turned = proper_motion_orbit.kernel(-b, e1, a, e1, -d, e2, c, e2, rho, plx, mass, settings=rule_settings)
    for key in ("outcome", "strength", "statistic", "delta_pm", "delta_pm_uncertainty", "p_bound", "within_limit"):
        same(turned[key], first[key], what=key)


rv = finite(-300.0, 300.0)
rv_row = st.tuples(*(maybe_missing(x) for x in (rv, positive(1e-2, 10.0), rv, positive(1e-2, 10.0),
                                                 positive(1e-2, 1e4), positive(1.0, 5e3), positive(0.05, 50.0))))


@FEW
@given(st.lists(rv_row, min_size=1, max_size=10))
def test_radial_velocity_kernel_on_arrays_equals_each_pair_alone_and_ignores_which_star_is_first(rows):
    columns = list(np.array(rows).T)
    rule_settings = radial_velocity.Settings()
    together = radial_velocity.kernel(*columns, settings=rule_settings)
    alone = each_row_alone(radial_velocity.kernel, columns, settings=rule_settings)
    for key in together:
        same(together[key], alone[key], what=key)
    decided = together["outcome"] != OUTCOME_CODES["insufficient"]
    assert np.all(np.abs(together["strength"][decided]) <= 99)
    swapped = radial_velocity.kernel(columns[2], columns[3], columns[0], columns[1], *columns[4:],
                                     settings=rule_settings)
    for key in together:
        if key == "delta_rv":
            same(swapped[key], -together[key], what=key)
        else:
            same(swapped[key], together[key], what=key)
