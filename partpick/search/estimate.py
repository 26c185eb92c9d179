"""Fast estimates of a candidate's yield, vectorised over many candidates, from the same
variation model the Monte Carlo draws (:mod:`partpick.tolerance`) but in closed form:
normal approximations of each requirement's spread, evaluated at the temperature ends
and the nominal temperature (the Monte Carlo draws the temperature uniformly), and the
requirements taken as independent. The search ranks and screens with these; the
Monte Carlo of verification decides.

Shares of each requirement pass: frequency, P(|e + d(T) + N(0, s^2)| <= tol); startup,
P(m + N(0, s_m^2) > 0); amplitude, P(|ln A(T) + N(0, s_a^2)| <= ln(1 + tol)) about the
target; THD, P(thd + N(0, s_t^2) <= limit) -- with N the normal distribution (the
tolerance model's spreads, JCGM 100 first-order propagation).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["phi", "window_share", "below_share", "frequency_share", "frequency_tolerance", "amplitude_sd"]

_SQRT2 = math.sqrt(2.0)


def phi(x: np.ndarray) -> np.ndarray:
    """Standard normal distribution function, vectorised (math.erf per element is too
    slow for the search's arrays; numpy has no erf, so Abramowitz and Stegun 7.1.26,
    |error| < 1.5e-7)."""
    x = np.asarray(x, float)
    if x.ndim == 0:
        return phi(x[None])[0]
    # the textbook expression 0.5 (1 + sign(x) erf), erf = 1 - t (a1 + t (a2 + ...)) exp(-z^2),
    # t = 1 / (1 + p z), evaluated in place in the same order (the same numbers to the last
    # bit, without a temporary array per operation: the search's arrays have 10^5 rows)
    z = np.abs(x)
    z /= _SQRT2
    t = 0.3275911 * z
    t += 1.0
    np.divide(1.0, t, out=t)
    poly = t * 1.061405429
    for a in (-1.453152027, 1.421413741, -0.284496736, 0.254829592):
        poly += a
        poly *= t
    z *= z
    np.negative(z, out=z)
    poly *= np.exp(z, out=z)
    erf = np.subtract(1.0, poly, out=poly)
    erf *= np.sign(x)
    erf += 1.0
    erf *= 0.5
    return erf


def window_share(mean: np.ndarray, sd: np.ndarray, half_width: np.ndarray | float) -> np.ndarray:
    """P(|mean + N(0, sd^2)| <= half_width)."""
    sd = np.maximum(sd, 1e-12)
    return phi((half_width - mean) / sd) - phi((-half_width - mean) / sd)


def below_share(mean: np.ndarray, sd: np.ndarray, limit: np.ndarray | float) -> np.ndarray:
    """P(mean + N(0, sd^2) <= limit)."""
    return phi((limit - mean) / np.maximum(sd, 1e-12))


def amplitude_sd(slope: np.ndarray, s_m: np.ndarray, vf_rel: float, other: float) -> np.ndarray:
    """Spread (ln, one standard deviation) of the load amplitude over builds: the
    amplitude's slope in the gain excess (d ln A / d m) times the gain excess's spread
    s_m (nepers), the limiter's own part-to-part spread vf_rel (a fraction, taken as 3
    standard deviations) and the spread of the parts after it, other (ln), independent
    (their root sum of squares, JCGM 100 first-order propagation)."""
    return np.sqrt((slope * s_m) ** 2 + (vf_rel / 3) ** 2 + other ** 2)


def frequency_share(err: np.ndarray, sigma_lnf: np.ndarray | float, drift: float, tol: float) -> np.ndarray:
    """Share of builds within the frequency tolerance: nominal error ``err`` (ln), the
    tolerance spread sigma_lnf, and a temperature drift uniform within +/- ``drift``
    (its variance drift^2/3 added; the temperature is uniform over the range and the
    tempcos over their bounds)."""
    return window_share(err, _frequency_sd(sigma_lnf, drift), math.log1p(tol))


def _frequency_sd(sigma_lnf, drift: float):
    return np.sqrt(np.asarray(sigma_lnf, float) ** 2 + drift ** 2 / 3.0)


def frequency_tolerance(sigma_lnf: float, drift: float, share: float) -> float:
    """The frequency tolerance (fraction) that a build centred on the target holds in
    ``share`` of builds: frequency_share inverted (bisection on the half width, ln, to
    1e-6 of it; the share rises with it)."""
    sd = float(_frequency_sd(sigma_lnf, drift))
    share = min(share, 1.0 - 1e-9)   # (every share below 1 is reached at a finite width)
    lo, hi = 0.0, max(sd, 1e-9)
    while window_share(0.0, sd, hi) < share:
        hi *= 2.0
    while hi - lo > 1e-6 * hi:
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if window_share(0.0, sd, mid) < share else (lo, mid)
    return math.expm1(hi)
