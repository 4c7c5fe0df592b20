"""Stellar luminosities, zero-age main-sequence properties, lifetimes and ages.

Four groups of pure, vectorised kernels (plain floats in fixed units):

* Luminosity. L/L☉ = (R/R☉)² (T/T☉)⁴ with the IAU 2015 Resolution B3 nominal
  solar values; the V-band bolometric correction of Flower 1996, ApJ 469, 355
  with the coefficients as reprinted by Torres 2010, AJ 140, 1158 (Table 1);
  L from an apparent magnitude, a distance and a BC on the IAU 2015
  Resolution B2 bolometric scale.
* Zero-age main sequence (ZAMS) L and R of Tout, Pols, Eggleton & Han 1996,
  MNRAS 281, 257 (eqs. 1–4, Tables 1–2).
* Lifetimes of Hurley, Pols & Tout 2000, MNRAS 315, 543 (the SSE fits, §5
  and Appendix A): time to the base of the giant branch t_BGB, the main
  sequence t_MS = max(μ, x) t_BGB, the ignition of helium t_HeI and the end
  of core helium burning t_HeI + t_He.
* Ages. An age interval for a star in a given stage, with the mass
  uncertainty carried through; the overlap of several such intervals (are
  the stars of a system coeval?) and how far apart they are when they are not.

Units: masses in M☉, radii in R☉ (IAU nominal), luminosities in L☉ (IAU
nominal, 3.828e26 W), temperatures in K, distances in pc, magnitudes in mag,
times in Myr. Z is the metal mass fraction (Z = 0.02 is the fits' solar value).

Where the coefficients come from
--------------------------------
The fits' coefficient tables were read from the authors' own code, not typed
from memory, and cross-checked against a second, independent transcription:

* Tout et al. 1996 Tables 1–2 and Hurley et al. 2000 Appendix A (a1–a10, the
  giant-branch and core-helium-burning coefficients): SSE's ``BLOCK DATA
  zdata`` (Hurley, Pols & Tout), in a public archive of the N-body codes
  that ship it, file ``zdata.f``; the way each is combined (polynomials in
  ζ = log10(Z/0.02), continuity constants, clamps) from the same authors'
  ``zcnsts.f``, ``zfuncs.f`` (a public copy of BSE) and ``star.f`` (SSE/BSE).
* a1–a10 agree digit for digit with the transcription in Starlab/SeBa
  (``stellar_model_constants::a``), which labels eqs. 4–7 of the paper.
  Some other public transcriptions carry typos (a2's ζ² term as 5.772723e1
  instead of 5.772723e2, a4 as 4.141990e-2 instead of 4.141960e-2, a2's ζ³
  term as 7.411230 instead of 7.411230e1): see METHODS.md, "Stellar evolution".
* Flower's BC_V coefficients (Torres 2010, Table 1): the same numbers appear
  in several independent public codes; two that quote Torres's Table 1 were
  compared digit for digit.

Known limits
------------
The SSE fits are valid for 0.1–100 M☉ (SSE caps the mass at 100 M☉) and
1e-4 ≤ Z ≤ 0.03; they describe single, non-rotating stars without mass loss
on the main sequence. Ages of low-mass main-sequence stars are essentially
unconstrained by the stage alone (t_MS exceeds a Hubble time below ~0.9 M☉).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.polynomial import polynomial as _P
from numpy.typing import ArrayLike, NDArray

# ---------------------------------------------------------------- constants

# IAU 2015 Resolution B3 (Prša et al. 2016, AJ 152, 41): nominal solar values.
T_SUN_K = 5772.0
R_SUN_M = 6.957e8
L_SUN_W = 3.828e26
GM_SUN_M3_S2 = 1.3271244e20
# IAU 2015 Resolution B2 (Mamajek et al. 2015, arXiv:1510.06262): zero point
# L0 of the absolute bolometric magnitude scale, and the Sun's M_bol on it,
# −2.5 log10(L☉/L0) = 4.7393 ≈ 4.74.
L0_W = 3.0128e28
MBOL_SUN = 4.74
# Torres 2010, AJ 140, 1158, §3: the M_bol☉ consistent with Flower's BC_V
# scale and V☉ = −26.76. See luminosity_from_magnitude for the 0.01 mag choice.
MBOL_SUN_TORRES = 4.73
# CODATA 2018 Newtonian constant of gravitation; M☉ = GM☉/G is then the
# IAU-consistent solar mass (as astropy.constants.M_sun).
G_SI = 6.67430e-11
# Julian year (IAU), s.
JULIAN_YEAR_S = 365.25 * 86400.0

# ---------------------------------------------------------------- luminosity


def luminosity_from_radius_teff(R_rsun: ArrayLike, teff_K: ArrayLike) -> NDArray[np.float64]:
    """Luminosity from radius and effective temperature, L = R² (T/T☉)⁴.

    Parameters
    ----------
    R_rsun : array_like
        Radius in nominal solar radii (R☉ = 6.957e8 m).
    teff_K : array_like
        Effective temperature in K.

    Returns
    -------
    ndarray
        Luminosity in nominal solar luminosities (L☉ = 3.828e26 W).

    Notes
    -----
    Stefan–Boltzmann's law scaled to the IAU 2015 Resolution B3 nominal
    values, T☉ = 5772 K, R☉ = 6.957e8 m, L☉ = 3.828e26 W, which are
    consistent with σ_SB to about 1e-5 (so 1 R☉ at 5772 K is 1 L☉ exactly).
    """
    R = np.asarray(R_rsun, dtype=float)
    T = np.asarray(teff_K, dtype=float)
    return R * R * (T / T_SUN_K) ** 4


# Flower 1996, ApJ 469, 355, as corrected and reprinted by Torres
# 2010, AJ 140, 1158, Table 1: BC_V = Σ c_k (log10 Teff)^k, in increasing powers.
# Cross-checked digit for digit against several independent public codes
# found by text search, two of which cite Torres's Table 1 explicitly (one
# reprints the table in a docstring).
_FLOWER_COOL = (-0.190537291496456e05, 0.155144866764412e05, -0.421278819301717e04, 0.381476328422343e03)
_FLOWER_MID = (-0.370510203809015e05, 0.385672629965804e05, -0.150651486316025e05, 0.261724637119416e04,
               -0.170623810323864e03)
_FLOWER_HOT = (-0.118115450538963e06, 0.137145973583929e06, -0.636233812100225e05, 0.147412923562646e05,
               -0.170587278406872e04, 0.788731721804990e02)
# Torres 2010 Table 1 column headings: log Teff < 3.70, 3.70–3.90, > 3.90.
_FLOWER_EDGES = (3.70, 3.90)
# Clamp: Flower's calibrating stars span 2900–52500 K (Flower 1996, ApJ 469, 355,
# its machine-readable table), and the cool branch, fitted to few M stars, runs away below about
# 3300 K (METHODS.md, "Luminosity").
BC_TEFF_MIN_K = 3300.0
BC_TEFF_MAX_K = 50000.0


class BolometricCorrection(NamedTuple):
    """``bc`` (mag, to be added to V) and ``clamped`` (bool: Teff was outside
    [BC_TEFF_MIN_K, BC_TEFF_MAX_K] and the BC is the one at the nearer edge)."""

    bc: NDArray[np.float64]
    clamped: NDArray[np.bool_]


def bolometric_correction_v(teff_K: ArrayLike) -> BolometricCorrection:
    """V-band bolometric correction BC_V(Teff) of Flower 1996 (Torres 2010 coefficients).

    Parameters
    ----------
    teff_K : array_like
        Effective temperature in K.

    Returns
    -------
    BolometricCorrection
        ``bc`` in mag (M_bol = M_V + BC_V) and ``clamped``, True where Teff was
        outside 3300–50,000 K and was moved to the nearer limit. NaN in, NaN
        out (not flagged).

    Notes
    -----
    Three polynomials in log10 Teff (Flower 1996, ApJ 469, 355, with the
    misprinted coefficients corrected in Torres 2010, AJ 140, 1158, Table 1):
    log T < 3.70, 3.70 ≤ log T < 3.90 and log T ≥ 3.90. The branches do not
    join exactly: the BC jumps by a few hundredths of a magnitude at the two
    boundaries. The zero point of this scale goes with M_bol☉ = 4.73 (Torres
    2010); see :func:`luminosity_from_magnitude`.
    """
    T = np.asarray(teff_K, dtype=float)
    with np.errstate(invalid="ignore"):
        clamped = (T < BC_TEFF_MIN_K) | (T > BC_TEFF_MAX_K)
    logt = np.log10(np.clip(T, BC_TEFF_MIN_K, BC_TEFF_MAX_K))
    bc = np.where(logt < _FLOWER_EDGES[0], _P.polyval(logt, _FLOWER_COOL),
                  np.where(logt < _FLOWER_EDGES[1], _P.polyval(logt, _FLOWER_MID), _P.polyval(logt, _FLOWER_HOT)))
    return BolometricCorrection(bc=bc, clamped=clamped)


def luminosity_from_magnitude(m_V: ArrayLike, distance_pc: ArrayLike, bc: ArrayLike, A_V: ArrayLike = 0.0,
                              mbol_sun: float = MBOL_SUN) -> NDArray[np.float64]:
    """Luminosity from an apparent V magnitude, a distance and a bolometric correction.

    Parameters
    ----------
    m_V : array_like
        Apparent V magnitude, mag.
    distance_pc : array_like
        Distance, pc.
    bc : array_like
        Bolometric correction BC_V, mag (e.g. from :func:`bolometric_correction_v`).
    A_V : array_like, optional
        Extinction in V, mag (default 0).
    mbol_sun : float, optional
        Absolute bolometric magnitude of the Sun, mag (default 4.74, IAU 2015
        Resolution B2).

    Returns
    -------
    ndarray
        Luminosity in nominal solar luminosities.

    Notes
    -----
    M_bol = m_V − 5 log10(d/10 pc) − A_V + BC_V and L/L☉ = 10^(−0.4 (M_bol −
    M_bol☉)) (distance modulus and Pogson's scale).

    The choice of M_bol☉: IAU 2015 B2 fixes the bolometric scale so that
    M_bol☉ = 4.74 for L☉ = 3.828e26 W. Torres 2010 shows that a table of BC_V
    must be paired with the M_bol☉ that reproduces the Sun's apparent
    brightness on that table's own zero point, and gives M_bol☉ = 4.73 for
    Flower's BCs (with V☉ = −26.76). The two differ by 0.01 mag, i.e. 0.9 %
    in L, far below the usual errors of BC_V (≳ 0.05 mag) and of distances;
    we keep the IAU value as the default so that every luminosity in the
    project is on one scale, and a caller that wants Torres's exact pairing
    passes ``mbol_sun=MBOL_SUN_TORRES``.
    """
    m = np.asarray(m_V, dtype=float)
    d = np.asarray(distance_pc, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        mbol = m - 5.0 * np.log10(d / 10.0) - np.asarray(A_V, dtype=float) + np.asarray(bc, dtype=float)
    return 10.0 ** (-0.4 * (mbol - mbol_sun))


# ---------------------------------------------------------------- helpers


def _zeta(Z: NDArray) -> NDArray:
    """ζ = log10(Z/0.02), the variable of every metallicity polynomial of Tout 1996 and Hurley 2000."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log10(Z / 0.02)


def _poly(zeta: NDArray, *coeffs: float) -> NDArray:
    """c0 + c1 ζ + c2 ζ² + ... (coefficients in increasing powers)."""
    return _P.polyval(zeta, coeffs)


def _mass_z(M: ArrayLike, Z: ArrayLike) -> tuple[NDArray, NDArray]:
    """Broadcast mass and metallicity to float arrays; non-positive or infinite masses become NaN."""
    m, z = np.broadcast_arrays(np.asarray(M, dtype=float), np.asarray(Z, dtype=float))
    m = np.where(np.isfinite(m) & (m > 0), m, np.nan)
    return m, z.astype(float)


# ---------------------------------------------------------------- ZAMS (Tout et al. 1996)

# Tout, Pols, Eggleton & Han 1996, MNRAS 281, 257, Table 1 (ZAMS luminosity,
# eq. 1) and Table 2 (ZAMS radius, eq. 2): each coefficient is a polynomial in
# ζ = log10(Z/0.02) (eqs. 3–4), listed here in increasing powers of ζ.
# Read from SSE's BLOCK DATA zdata, array xz (qshu/NbodyArchive, zdata.f);
# the same numbers appear in several independent public transcriptions of
# Tout's tables (found by text search for 0.39704170).
_TOUT_L = {
    "alpha": (0.39704170, -0.32913574, 0.34776688, 0.37470851, 0.09011915),
    "beta": (8.52762600, -24.41225973, 56.43597107, 37.06152575, 5.45624060),
    "gamma": (0.00025546, -0.00123461, -0.00023246, 0.00045519, 0.00016176),
    "delta": (5.43288900, -8.62157806, 13.44202049, 14.51584135, 3.39793084),
    "epsilon": (5.56357900, -10.32345224, 19.44322980, 18.97361347, 4.16903097),
    "zeta": (0.78866060, -2.90870942, 6.54713531, 4.05606657, 0.53287322),
    "eta": (0.00586685, -0.01704237, 0.03872348, 0.02570041, 0.00383376),
}
_TOUT_R = {
    "theta": (1.71535900, 0.62246212, -0.92557761, -1.16996966, -0.30631491),
    "iota": (6.59778800, -0.42450044, -12.13339427, -10.73509484, -2.51487077),
    "kappa": (10.08855000, -7.11727086, -31.67119479, -24.24848322, -5.33608972),
    "lambda": (1.01249500, 0.32699690, -0.00923418, -0.03876858, -0.00412750),
    "mu": (0.07490166, 0.02410413, 0.07233664, 0.03040467, 0.00197741),
    "nu": (0.01077422,),
    "xi": (3.08223400, 0.94472050, -2.15200882, -2.49219496, -0.63848738),
    "omicron": (17.84778000, -7.45345690, -48.96066856, -40.05386135, -9.09331816),
    "pi": (0.00022582, -0.00186899, 0.00388783, 0.00142402, -0.00007671),
}


def zams_luminosity(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """Zero-age main-sequence luminosity of Tout et al. 1996.

    Parameters
    ----------
    M : array_like
        Mass, M☉ (fit valid for 0.1–100 M☉).
    Z : array_like, optional
        Metallicity (mass fraction; fit valid for 1e-4 ≤ Z ≤ 0.03), default 0.02.

    Returns
    -------
    ndarray
        L_ZAMS in L☉ (NaN for non-positive or infinite masses).

    Notes
    -----
    Tout, Pols, Eggleton & Han 1996, MNRAS 281, 257, eq. (1):
    L = (α M^5.5 + β M^11) / (γ + M³ + δ M⁵ + ε M⁷ + ζ M⁸ + η M^9.5),
    coefficients from Table 1 as polynomials in log10(Z/0.02) (eq. 3).
    """
    m, z = _mass_z(M, Z)
    k = {name: _poly(_zeta(z), *c) for name, c in _TOUT_L.items()}
    return (k["alpha"] * m**5.5 + k["beta"] * m**11) / (
        k["gamma"] + m**3 + k["delta"] * m**5 + k["epsilon"] * m**7 + k["zeta"] * m**8 + k["eta"] * m**9.5)


def zams_radius(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """Zero-age main-sequence radius of Tout et al. 1996.

    Parameters
    ----------
    M : array_like
        Mass, M☉ (fit valid for 0.1–100 M☉).
    Z : array_like, optional
        Metallicity (mass fraction), default 0.02.

    Returns
    -------
    ndarray
        R_ZAMS in R☉ (NaN for non-positive or infinite masses).

    Notes
    -----
    Tout et al. 1996, MNRAS 281, 257, eq. (2):
    R = (θ M^2.5 + ι M^6.5 + κ M^11 + λ M^19 + μ M^19.5) /
    (ν + ξ M² + o M^8.5 + M^18.5 + π M^19.5), coefficients from Table 2 as
    polynomials in log10(Z/0.02) (eq. 4).
    """
    m, z = _mass_z(M, Z)
    k = {name: _poly(_zeta(z), *c) for name, c in _TOUT_R.items()}
    return (k["theta"] * m**2.5 + k["iota"] * m**6.5 + k["kappa"] * m**11 + k["lambda"] * m**19
            + k["mu"] * m**19.5) / (k["nu"] + k["xi"] * m**2 + k["omicron"] * m**8.5 + m**18.5 + k["pi"] * m**19.5)


def t_kh_zams(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """Kelvin–Helmholtz time at the ZAMS, t_KH = G M² / (R L), in Myr.

    Parameters
    ----------
    M : array_like
        Mass, M☉.
    Z : array_like, optional
        Metallicity, default 0.02.

    Returns
    -------
    ndarray
        t_KH in Myr, with R and L the Tout et al. 1996 ZAMS values.

    Notes
    -----
    The thermal time scale G M²/(R L) (e.g. Kippenhahn, Weigert & Weiss 2012,
    "Stellar Structure and Evolution", ch. 3), which sets the duration of
    pre-main-sequence contraction to within a factor of order unity.
    G M☉²/(R☉ L☉) = 31.4 Myr with the IAU 2015 B3 nominal values.
    """
    m, z = _mass_z(M, Z)
    unit_myr = GM_SUN_M3_S2 * (GM_SUN_M3_S2 / G_SI) / (R_SUN_M * L_SUN_W) / (1e6 * JULIAN_YEAR_S)
    return unit_myr * m * m / (zams_radius(m, z) * zams_luminosity(m, z))


# ---------------------------------------------------------------- lifetimes (Hurley et al. 2000)

# Hurley, Pols & Tout 2000, MNRAS 315, 543, Appendix A, a1–a10 (eqs. 4–7),
# each a polynomial in ζ (increasing powers). Read from SSE's BLOCK DATA
# zdata, array xt(1–31) (qshu/NbodyArchive, zdata.f), assembled as in
# zcnsts.f (msp(17)–msp(26)); identical to Starlab/SeBa's
# stellar_model_constants::a(1..10).
_A = {
    1: (1.593890e3, 2.053038e3, 1.231226e3, 2.327785e2),
    2: (2.706708e3, 1.483131e3, 5.772723e2, 7.411230e1),
    3: (1.466143e2, -1.048442e2, -6.795374e1, -1.391127e1),
    4: (4.141960e-2, 4.564888e-2, 2.958542e-2, 5.571483e-3),
    5: (3.426349e-1,),
    6: (1.949814e1, 1.758178e0, -6.008212e0, -4.470533e0),
    7: (4.903830e0,),
    8: (5.212154e-2, 3.166411e-2, -2.750074e-3, -2.271549e-3),
    9: (1.312179e0, -3.294936e-1, 9.231860e-2, 2.610989e-2),
    10: (8.073972e-1,),
}

# SSE caps the mass at 100 M☉ (star.f: "if(mass0.gt.100.d0) mass = 100.d0").
_M_MAX = 100.0


def _a(n: int, zeta: NDArray) -> NDArray:
    return _poly(zeta, *_A[n])


def _t_bgb_z(m: NDArray, zeta: NDArray) -> NDArray:
    """Hurley et al. 2000 eq. (4), Myr."""
    return (_a(1, zeta) + _a(2, zeta) * m**4 + _a(3, zeta) * m**5.5 + m**7) / (_a(4, zeta) * m**2 + _a(5, zeta) * m**7)


def t_bgb(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """Time from the ZAMS to the base of the giant branch, Hurley et al. 2000 eq. (4).

    Parameters
    ----------
    M : array_like
        Initial mass, M☉ (0.1–100; larger masses are evaluated at 100 as in SSE).
    Z : array_like, optional
        Metallicity, default 0.02.

    Returns
    -------
    ndarray
        t_BGB in Myr: t = (a1 + a2 M⁴ + a3 M^5.5 + M⁷)/(a4 M² + a5 M⁷), with
        a1–a5 from Appendix A. For M above M_FGB (≈ 13 M☉ at Z = 0.02), which
        have no giant branch, this is the time of helium ignition.
    """
    m, z = _mass_z(M, Z)
    return _t_bgb_z(np.minimum(m, _M_MAX), _zeta(z))


def ms_hook_fraction(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """μ = t_hook/t_BGB, Hurley et al. 2000 eq. (7).

    μ = max(0.5, 1 − 0.01 max(a6/M^a7, a8 + a9/M^a10)), dimensionless.
    Only meaningful above M_hook (≈ 1.02 M☉ at Z = 0.02, eq. 1), where the
    main sequence ends with a hook.
    """
    m, z = _mass_z(M, Z)
    m = np.minimum(m, _M_MAX)
    zeta = _zeta(z)
    return np.maximum(0.5, 1.0 - 0.01 * np.maximum(_a(6, zeta) / m ** _a(7, zeta),
                                                   _a(8, zeta) + _a(9, zeta) / m ** _a(10, zeta)))


def ms_fraction_x(Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """x = t_MS/t_BGB for stars without a hook, Hurley et al. 2000 eq. (6).

    x = max(0.95, min(0.95 − 0.03 (ζ + 0.30103), 0.99)), ζ = log10(Z/0.02).
    Note: SSE's zcnsts.f (zpars(8)) uses a different expression in Z that
    gives the same x = 0.95 at Z = 0.02 and differs by < 0.01 elsewhere;
    this follows the paper.
    """
    zeta = _zeta(np.asarray(Z, dtype=float))
    return np.maximum(0.95, np.minimum(0.95 - 0.03 * (zeta + 0.30103), 0.99))


def t_hook(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """Time of the start of the main-sequence hook, t_hook = μ t_BGB (Hurley et al. 2000 eq. 7), Myr."""
    return ms_hook_fraction(M, Z) * t_bgb(M, Z)


def t_ms(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """Main-sequence lifetime, Hurley et al. 2000 eq. (5).

    Parameters
    ----------
    M : array_like
        Initial mass, M☉ (0.1–100).
    Z : array_like, optional
        Metallicity, default 0.02.

    Returns
    -------
    ndarray
        t_MS = max(t_hook, x t_BGB) = max(μ, x) t_BGB in Myr (eqs. 4–7), as in
        SSE's star.f ("tm = MAX(zpars(8),thookf(mass))*tscls(1)").
    """
    return np.maximum(ms_hook_fraction(M, Z), ms_fraction_x(Z)) * t_bgb(M, Z)


def t_ms_rule_of_thumb(M: ArrayLike) -> NDArray[np.float64]:
    """Main-sequence lifetime by the rule of thumb 10 Gyr (M/M☉)^−2.5, in Myr.

    Common practice (L ∝ M^3.5 burning a fixed fraction of the mass); a
    cross-check only: within a factor of ~2 of :func:`t_ms` between 1 and 10 M☉.
    """
    return 1.0e4 * np.asarray(M, dtype=float) ** -2.5


# --- Giant branch and core helium burning (Hurley et al. 2000 §5.2–5.3).
# Every expression below is the authors' code: SSE zcnsts.f (the Z-dependent
# constants and the continuity constants), zfuncs.f (lbgbf, lHeIf, tHef,
# themsf, mcgbf) and star.f (the giant-branch parameters and time scales).
# Coefficients from SSE's BLOCK DATA zdata (qshu/NbodyArchive, zdata.f):
# arrays xg(1–24) (L_BGB, the paper's a27–a32, c2, c3) and xh(1–14, 44–65)
# (L_HeI and t_He, the paper's b9–b14 and b39–b45), increasing powers of ζ.
_LBGB = {  # gbp(1)–gbp(8) of zcnsts.f
    1: (9.511033e1, 6.819618e1, -1.045625e1, -1.474939e1),
    2: (3.113458e1, 1.012033e1, -4.650511e0, -2.463185e0),
    3: (1.413057e0, 4.578814e-1, -6.850581e-2, -5.588658e-2),  # raised to the power gbp(6)
    4: (3.910862e1, 5.196646e1, 2.264970e1, 2.873680e0),
    5: (4.597479e0, -2.855179e-1, 2.709724e-1),
    6: (6.682518e0, 2.827718e-1, -7.294429e-2),
    7: (4.637345e0,),
    8: (9.301992e0,),
}
_LHEI = {  # gbp(38)–gbp(44) of zcnsts.f; gbp(41) is the continuity constant
    38: (2.751631e3, 3.557098e2),
    39: (-3.820831e-2, 5.872664e-2),
    40: (1.5e1,),
    42: (1.071738e2, -8.970339e1, -3.949739e1),  # squared
    43: (7.348793e2, -1.531020e2, -3.793700e1),
    44: (9.219293e0, -2.005865e0, -5.561309e-1),  # squared
}
_THE = {  # gbp(54)–gbp(61) of zcnsts.f; gbp(57) is the continuity constant
    54: (1.314955e2, 2.009258e1, -5.143082e-1, -1.379140e0),
    55: (1.823973e1, -3.074559e0, -4.307878e0),  # at least 1
    56: (1.5e1,),
    58: (2.327037e0, 2.403445e0, 1.208407e0, 2.087263e-1),  # raised to the power gbp(61)
    59: (1.079113e-1, 1.762409e-2, 1.096601e-2, 3.058818e-3),
    60: (2.327409e0, 6.901582e-1, -2.158431e-1, -1.084117e-1),  # to the fifth power
    61: (1.997378e0, -8.126205e-1),
}


def m_hook(Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """M_hook, the mass above which the main sequence has a hook: Hurley et al. 2000 eq. (1), M☉."""
    zeta = _zeta(np.asarray(Z, dtype=float))
    return 1.0185 + 0.16015 * zeta + 0.0892 * zeta**2


def m_hef(Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """M_HeF, the largest mass with a degenerate helium flash: Hurley et al. 2000 eq. (2), M☉."""
    zeta = _zeta(np.asarray(Z, dtype=float))
    return 1.995 + 0.25 * zeta + 0.087 * zeta**2


def m_fgb(Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """M_FGB, the largest mass that ignites helium on a giant branch: Hurley et al. 2000 eq. (3), M☉.

    13.048 (Z/0.02)^0.06 / (1 + 0.0012 (0.02/Z)^1.27), written in SSE's
    zcnsts.f as 16.5 Z^0.06 / (1 + (1e-4/Z)^1.27).
    """
    z = np.asarray(Z, dtype=float)
    return 16.5 * z**0.06 / (1.0 + (1.0e-4 / z) ** 1.27)


def _l_bgb(m: NDArray, zeta: NDArray) -> NDArray:
    """Luminosity at the base of the giant branch, L☉ (the paper's a27–a32 fit; zfuncs.f lbgbf)."""
    g = {k: _poly(zeta, *c) for k, c in _LBGB.items()}
    g3 = g[3] ** g[6]
    return (g[1] * m ** g[5] + g[2] * m ** g[8]) / (g3 + g[4] * m ** g[7] + m ** g[6])


def _l_hei(m: NDArray, zeta: NDArray, mhef: NDArray) -> NDArray:
    """Luminosity at helium ignition, L☉ (zfuncs.f lHeIf, with zcnsts.f's continuity constant at M_HeF)."""
    a38, a39, a40 = (_poly(zeta, *_LHEI[k]) for k in (38, 39, 40))
    a42 = _poly(zeta, *_LHEI[42]) ** 2
    a43 = _poly(zeta, *_LHEI[43])
    a44 = _poly(zeta, *_LHEI[44]) ** 2

    def intermediate(x: NDArray) -> NDArray:
        return (a42 + a43 * x**3.8) / (a44 + x * x)

    l_flash = intermediate(mhef)
    a41 = (a38 * mhef**a39 - l_flash) / (np.exp(mhef * a40) * l_flash)
    low = np.minimum(m, mhef)  # keeps exp() finite where the branch is not used
    return np.where(m < mhef, a38 * low**a39 / (1.0 + a41 * np.exp(low * a40)), intermediate(m))


def _t_hems(mc: NDArray) -> NDArray:
    """Main-sequence lifetime of a naked helium star of mass mc, Myr (zfuncs.f themsf; the paper's naked-helium-star fit)."""
    return (0.4129 + 18.81 * mc**4 + 1.853 * mc**6) / mc**6.5


def _gb_parameters(m: NDArray, zeta: NDArray) -> dict[str, NDArray]:
    """Giant-branch core-mass–luminosity relation and hydrogen-burning rate (SSE star.f, GB(1)–GB(7))."""
    log_d_z = 5.37 + 0.135 * zeta  # zcnsts.f zpars(6)
    ramp = (m - 2.0) / 0.5
    dx = log_d_z - (0.975 * log_d_z - 0.18 * 2.5)
    log_d_hi = np.maximum(np.maximum(-1.0, 0.5 * log_d_z - 0.06 * m), 0.975 * log_d_z - 0.18 * m)
    log_d = np.where(m <= 2.0, log_d_z, np.where(m < 2.5, log_d_z - dx * ramp, log_d_hi))
    p = np.where(m <= 2.0, 6.0, np.where(m < 2.5, 6.0 - ramp, 5.0))
    q = np.where(m <= 2.0, 3.0, np.where(m < 2.5, 3.0 - ramp, 2.0))
    D = 10.0**log_d
    B = np.maximum(3.0e4, 500.0 + 1.75e4 * m**0.6)
    A = 10.0 ** np.maximum(-4.8, np.minimum(-5.7 + 0.8 * m, -4.1 + 0.14 * m))
    Mx = (B / D) ** (1.0 / (p - q))
    return {"A": A, "B": B, "D": D, "p": p, "q": q, "Lx": D * Mx**p}


def _helium_times(m: NDArray, z: NDArray) -> tuple[NDArray, NDArray, NDArray]:
    """(t_BGB, t_HeI, t_He) in Myr for masses already capped at 100 M☉ (SSE star.f)."""
    zeta = _zeta(z)
    mhef, mfgb = m_hef(z), m_fgb(z)
    tb = _t_bgb_z(m, zeta)
    gb = _gb_parameters(m, zeta)
    A, B, D, p, q, Lx = gb["A"], gb["B"], gb["D"], gb["p"], gb["q"], gb["Lx"]
    l_bgb, l_hei = _l_bgb(m, zeta), _l_hei(m, zeta, mhef)
    # Giant-branch time scales (star.f tscls(4–6); the paper's giant-branch section):
    # L = D Mc^p below Lx and B Mc^q above, dMc/dt = A L.
    t_inf1 = tb + (1.0 / ((p - 1.0) * A * D)) * (D / l_bgb) ** ((p - 1.0) / p)
    t_x = t_inf1 - (t_inf1 - tb) * (l_bgb / Lx) ** ((p - 1.0) / p)
    t_inf2 = t_x + (1.0 / ((q - 1.0) * A * B)) * (B / Lx) ** ((q - 1.0) / q)
    t_hei_gb = np.where(l_hei <= Lx,
                        t_inf1 - (1.0 / ((p - 1.0) * A * D)) * (D / l_hei) ** ((p - 1.0) / p),
                        t_inf2 - (1.0 / ((q - 1.0) * A * B)) * (B / l_hei) ** ((q - 1.0) / q))
    # Above M_FGB there is no giant branch: helium ignites at t_BGB (star.f).
    t_hei_ = np.where(m <= mfgb, t_hei_gb, tb)
    # Core-helium-burning lifetime (zfuncs.f tHef with zcnsts.f's continuity constant gbp(57)).
    # Below M_HeF it is absolute (Myr) and depends on the core mass at ignition; above, a fraction of t_BGB.
    c = {k: _poly(zeta, *v) for k, v in _THE.items()}
    c[55] = np.maximum(c[55], 1.0)
    c[58] = c[58] ** c[61]
    c[60] = c[60] ** 5

    def ratio_im(x: NDArray) -> NDArray:  # t_He/t_BGB above M_HeF
        return (c[58] * x ** c[61] + c[59] * x**5) / (c[60] + x**5)

    c57 = (ratio_im(mhef) * _t_bgb_z(mhef, zeta) - c[54]) / (c[54] * np.exp(c[56] * mhef))
    # Core mass at helium ignition for the low-mass branch (zfuncs.f mcgbf).
    mc = np.where(l_hei <= Lx, (l_hei / D) ** (1.0 / p), (l_hei / B) ** (1.0 / q))
    low = np.minimum(m, mhef)
    mc_low = np.minimum(mc, 0.999 * mhef)  # only used where m <= M_HeF, where mc < M_HeF
    mm = np.maximum((mhef - low) / (mhef - mc_low), 1.0e-12)
    t_he_low = (c[54] + (_t_hems(mc_low) - c[54]) * mm ** c[55]) * (1.0 + c57 * np.exp(low * c[56]))
    t_he_ = np.where(m <= mhef, t_he_low, ratio_im(m) * tb)
    return tb, t_hei_, t_he_


def t_hei(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """Time of helium ignition (start of core helium burning), Myr.

    Parameters
    ----------
    M : array_like
        Initial mass, M☉ (0.1–100).
    Z : array_like, optional
        Metallicity, default 0.02.

    Returns
    -------
    ndarray
        t_HeI in Myr: t_BGB plus the time to climb the giant branch from
        L_BGB to L_HeI along the core-mass–luminosity relation (Hurley et al.
        2000, giant-branch section, as coded in SSE's star.f); t_BGB itself above
        M_FGB. For low-mass stars this includes the whole red-giant branch.
    """
    m, z = _mass_z(M, Z)
    return _helium_times(np.minimum(m, _M_MAX), z)[1]


def t_he(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """Duration of core helium burning t_He (Hurley et al. 2000, core-helium-burning fit; SSE's tHef), Myr.

    Parameters
    ----------
    M : array_like
        Initial mass, M☉ (0.1–100).
    Z : array_like, optional
        Metallicity, default 0.02.

    Returns
    -------
    ndarray
        t_He in Myr. Below M_HeF it depends on the core mass at helium
        ignition (from L_HeI and the giant-branch core-mass–luminosity
        relation); above, it is a fitted fraction of t_BGB.
    """
    m, z = _mass_z(M, Z)
    return _helium_times(np.minimum(m, _M_MAX), z)[2]


def t_hei_end(M: ArrayLike, Z: ArrayLike = 0.02) -> NDArray[np.float64]:
    """End of core helium burning (base of the asymptotic giant branch), t_HeI + t_He, Myr.

    Parameters
    ----------
    M : array_like
        Initial mass, M☉ (0.1–100).
    Z : array_like, optional
        Metallicity, default 0.02.

    Returns
    -------
    ndarray
        t_HeI + t_He in Myr.

    Notes
    -----
    This is SSE's t_BAGB (star.f: "tbagb = tscls(2) + tscls(3)"). For stars
    below M_HeF it is later than t_BGB + t_He by the red-giant-branch time.
    """
    m, z = _mass_z(M, Z)
    _, t_ign, t_burn = _helium_times(np.minimum(m, _M_MAX), z)
    return t_ign + t_burn


# ---------------------------------------------------------------- ages

# The asymptotic giant branch is not fitted here (it needs SSE's AGB core-mass
# growth and mass loss). Its duration is short: in SSE's 5 M☉, Z = 0.02 model
# core helium burning ends at 120.1 Myr and the star is a white dwarf at
# 121.5 Myr (AMUSE's SSE tests, amusecode/amuse src/amuse_sse/tests/test_sse.py),
# about 1 % of its life. An upper allowance of 5 % of t_HeI+t_He bounds the
# AGB generously (documented approximation, not a fit).
AGB_ALLOWANCE = 0.05
# Masses at which each interval is evaluated across M ± 2σ (the interval is
# the union over them, so it does not assume lifetimes fall monotonically).
_N_MASS = 41
# SSE's range of validity (Hurley et al. 2000, abstract: 0.1–100 M☉, Z = 1e-4–0.03).
M_MIN_FIT = 0.1
M_MAX_FIT = 100.0


def _agb_end(m: NDArray, z: NDArray) -> NDArray:
    return (1.0 + AGB_ALLOWANCE) * t_hei_end(m, z)


def _zero(m: NDArray, z: NDArray) -> NDArray:
    return np.zeros_like(m)


# stage -> (lower edge, upper edge), each a function of (mass, Z) in Myr.
_STAGES = {
    "pre-main-sequence": (_zero, t_kh_zams),
    "main-sequence": (_zero, t_ms),
    "leaving-main-sequence": (t_ms, t_bgb),
    "subgiant": (t_ms, t_bgb),
    "giant": (t_bgb, _agb_end),
    "core-helium-burning": (t_hei, t_hei_end),
    "asymptotic-giant": (t_hei_end, _agb_end),
}
STAGES = tuple(_STAGES)


class AgeInterval(NamedTuple):
    """``low`` and ``high`` age bounds in Myr, one per star."""

    low: NDArray[np.float64]
    high: NDArray[np.float64]


def age_interval(M: ArrayLike, sigma_M: ArrayLike, stage: str | ArrayLike, Z: ArrayLike = 0.02) -> AgeInterval:
    """Age interval allowed by a star's evolutionary stage and mass.

    Parameters
    ----------
    M, sigma_M : array_like
        Mass and its standard error, M☉.
    stage : str or array_like of str
        One of :data:`STAGES`, for all stars or one per star:
        ``"pre-main-sequence"`` [0, t_KH], ``"main-sequence"`` [0, t_MS],
        ``"leaving-main-sequence"`` or ``"subgiant"`` [t_MS, t_BGB],
        ``"giant"`` [t_BGB, (1 + AGB_ALLOWANCE)(t_HeI + t_He)],
        ``"core-helium-burning"`` [t_HeI, t_HeI + t_He],
        ``"asymptotic-giant"`` [t_HeI + t_He, (1 + AGB_ALLOWANCE)(t_HeI + t_He)].
    Z : array_like, optional
        Metallicity, default 0.02.

    Returns
    -------
    AgeInterval
        ``low``, ``high`` in Myr: the union of the stage's interval over all
        masses in [M − 2σ, M + 2σ] (evaluated at 41 masses spaced evenly in
        log M), so a lower mass, with its longer lifetimes, widens the upper
        end and a higher mass the lower end. NaN where M is not positive or
        not finite.

    Raises
    ------
    ValueError
        For an unknown stage, naming the known ones.

    Notes
    -----
    Lifetimes from Hurley, Pols & Tout 2000 (single stars, no rotation, no
    mass transfer); the ends of the mass range are clipped to the fits'
    0.1–100 M☉. The pre-main-sequence bound is a simple choice: the
    Kelvin–Helmholtz time at the ZAMS (:func:`t_kh_zams`), the order of the
    contraction time (about 50 Myr at 1 M☉, 0.2 Myr at 10 M☉); it is not a
    pre-main-sequence track. Metallicity is taken as exact.
    """
    m = np.asarray(M, dtype=float)
    s = np.nan_to_num(np.abs(np.asarray(sigma_M, dtype=float)), nan=0.0)
    stages = np.asarray(stage, dtype=object)
    m, s, z, stages = np.broadcast_arrays(m, s, np.asarray(Z, dtype=float), stages)
    unknown = sorted({str(x) for x in np.unique(stages.astype(str))} - set(_STAGES))
    if unknown:
        raise ValueError(f"unknown evolutionary stage {', '.join(repr(u) for u in unknown)}. "
                         f"Did you mean one of: {', '.join(STAGES)}?")
    valid = np.isfinite(m) & (m > 0)
    lo_m = np.clip(np.where(valid, m - 2.0 * s, 1.0), M_MIN_FIT, M_MAX_FIT)
    hi_m = np.clip(np.where(valid, m + 2.0 * s, 1.0), M_MIN_FIT, M_MAX_FIT)
    hi_m = np.maximum(hi_m, lo_m)
    frac = np.linspace(0.0, 1.0, _N_MASS)
    grid = np.exp(np.log(lo_m)[..., None] + (np.log(hi_m) - np.log(lo_m))[..., None] * frac)
    zg = np.broadcast_to(z[..., None], grid.shape)
    low = np.full(m.shape, np.nan)
    high = np.full(m.shape, np.nan)
    for name, (lower, upper) in _STAGES.items():
        sel = (stages.astype(str) == name) & valid
        if np.any(sel):
            low[sel] = np.min(lower(grid[sel], zg[sel]), axis=-1)
            high[sel] = np.max(upper(grid[sel], zg[sel]), axis=-1)
    return AgeInterval(low=low, high=high)


class CoevalOverlap(NamedTuple):
    """Common age interval of several stars and, when there is none, how far apart they are.

    ``common_low``, ``common_high`` (Myr; NaN when the intervals do not
    overlap); ``consistent`` (bool); ``gap_myr`` = max(lows) − min(highs)
    when positive, else 0; ``gap_dex`` = log10(max(lows)/min(highs)) when
    positive, else 0; ``oldest_low`` and ``youngest_high``, the indices of the
    star with the largest lower bound and of the star with the smallest upper
    bound (the pair in tension when inconsistent).
    """

    common_low: NDArray[np.float64]
    common_high: NDArray[np.float64]
    consistent: NDArray[np.bool_]
    gap_myr: NDArray[np.float64]
    gap_dex: NDArray[np.float64]
    oldest_low: NDArray[np.int64]
    youngest_high: NDArray[np.int64]


def coeval_overlap(lows: ArrayLike, highs: ArrayLike) -> CoevalOverlap:
    """Intersection of the age intervals of the stars of one system.

    Parameters
    ----------
    lows, highs : array_like, shape (..., n_stars)
        Age bounds in Myr (e.g. from :func:`age_interval`); the last axis runs
        over the stars of a system, leading axes over systems. A star with a
        NaN bound is ignored.

    Returns
    -------
    CoevalOverlap
        See the class. A gap in dex is the natural measure of tension for
        ages, whose uncertainties are multiplicative: 0.3 dex is a factor 2.

    Notes
    -----
    Stars born together must share an age: the common interval is
    [max(lows), min(highs)]. These are bounds, not probability distributions,
    so the tension is a distance between intervals, not a significance.
    """
    lo = np.asarray(lows, dtype=float)
    hi = np.asarray(highs, dtype=float)
    lo, hi = np.broadcast_arrays(lo, hi)
    lo_f = np.where(np.isfinite(lo), lo, -np.inf)
    hi_f = np.where(np.isfinite(hi), hi, np.inf)
    oldest = np.argmax(lo_f, axis=-1)
    youngest = np.argmin(hi_f, axis=-1)
    c_lo = np.take_along_axis(lo_f, oldest[..., None], axis=-1)[..., 0]
    c_hi = np.take_along_axis(hi_f, youngest[..., None], axis=-1)[..., 0]
    consistent = c_lo <= c_hi
    gap = np.where(consistent, 0.0, c_lo - c_hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        gap_dex = np.where(consistent, 0.0, np.log10(np.where(c_hi > 0, c_lo / c_hi, np.inf)))
    return CoevalOverlap(common_low=np.where(consistent, c_lo, np.nan),
                         common_high=np.where(consistent, c_hi, np.nan),
                         consistent=consistent, gap_myr=gap, gap_dex=gap_dex,
                         oldest_low=oldest, youngest_high=youngest)
