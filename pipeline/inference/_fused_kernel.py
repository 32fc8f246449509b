"""The compiled loop of :mod:`radwalk.inference.fused` (imported only when a fit uses it: numba loads slowly).

Each function repeats, per walker and in plain loops, the arithmetic of the
general path it replaces: :meth:`radwalk.host.params.Prior.logpdf`,
:meth:`radwalk.forward.model_grid._Axis.locate` (the product form of the
Lagrange weights), :meth:`radwalk.forward.model_grid.TrackGrid._interpolate`
and the Gaussian likelihood of :mod:`radwalk.plugins.likelihoods`.  Compiled
once and kept in numba's on-disk cache (``cache=True``).
"""

import math

import numba
import numpy as np

njit = numba.njit(cache=True, nogil=True, error_model="numpy")


# Slots of the packed settings (``ints`` and ``floats`` of log_posterior): one array each instead of thirty
# scalar arguments, because numba's dispatcher unboxes every argument on every call.
I_COL, I_CHECK_XZ, I_FIXED_X, I_FEH, I_MS, I_ZS, I_NZ, I_NPHASE = 0, 3, 4, 5, 6, 7, 8, 9
I_PRESENT, I_PRIOR_ONLY = 10, 13
F_FIXED, F_X, F_YP, F_DYDZ, F_FEH_MEAN, F_FEH_SIGMA, F_SOLAR_ZX, F_MTOL, F_ZTOL = 0, 3, 4, 5, 6, 7, 8, 9, 10
F_AGE_CAP, F_GYR, F_OBS, F_SIG, F_LOG_SIG, F_FOUR_PI_SIGMA = 11, 12, 13, 16, 19, 20
N_INTS, N_FLOATS = 14, 21


@njit
def prior_logpdf(code, row, x):
    """Log prior density of one value; ``row`` = (code, lower, upper, mean, sigma, constant)."""
    lo, hi, mean, sigma, const = row[1], row[2], row[3], row[4], row[5]
    if not (x >= lo and x <= hi):
        return -np.inf
    if code == 0:
        return const
    if code == 1:
        return -math.log(x) + const
    if code == 2:
        z = (x - mean) / sigma
        return -0.5 * z * z
    if code == 3:
        return -2.35 * math.log(x)
    # Kroupa (2001), continuous at the breaks, as radwalk.host.params.Prior.logpdf
    if x < 0.08:
        return -0.3 * math.log(x / 0.08) - 1.3 * math.log(0.08 / 0.5)
    if x < 0.5:
        return -1.3 * math.log(x / 0.5)
    return -2.3 * math.log(x / 0.5)

@njit
def locate(nodes, inv_den, s, tol, x, w):
    """Start of the ``s``-point stencil around ``x`` and its Lagrange weights in ``w[:s]``; -1 outside or NaN."""
    n = nodes.size
    lo, hi = nodes[0], nodes[n - 1]
    if not (x >= lo - tol and x <= hi + tol):
        return -1
    if n == 1:
        w[0] = 1.0
        return 0
    xc = min(max(x, lo), hi)
    i = np.searchsorted(nodes, xc, side="right") - 1
    if i > n - 2:
        i = n - 2
    start = min(max(i - (s - 2) // 2, 0), n - s)
    for j in range(s):
        left = 1.0
        for m in range(j):
            left *= xc - nodes[start + m]
        right = 1.0
        for m in range(j + 1, s):
            right *= xc - nodes[start + m]
        w[j] = left * right * inv_den[start, j]
    return start

@njit
def log_posterior(theta, out, ints, floats, kinds, rows, m_nodes, m_inv, z_nodes, z_inv, log_life, log_r, log_l):
    """Log-posterior of each walker into ``out`` [n] (-inf outside the support; never NaN).

    With ``ints[I_PRIOR_ONLY]`` set, the log prior alone (declared priors, [Fe/H], support, age-prior term).

    Parameters
    ----------
    theta : ndarray [n, ndim]
    out : ndarray [n]
    ints, floats : ndarray [N_INTS], [N_FLOATS]
        Packed settings, at the ``I_*`` and ``F_*`` slots.
    kinds : ndarray [ndim] of int
    rows : ndarray [ndim, 6]
        The priors, as :func:`prior_logpdf` reads them.
    m_nodes, z_nodes : ndarray [n_mass], [n_z]
        log10 M / M_sun and log10 Z of the tracks.
    m_inv, z_inv : ndarray [n_starts, s]
        Inverse denominators of the Lagrange weights of each stencil start.
    log_life : ndarray [n_mass * n_z]
        log10 of the lifetimes, s.
    log_r, log_l : ndarray [n_mass * n_z * n_phase]
        log10 of R (cm) and L (erg/s) of the tracks.
    """
    n, ndim = theta.shape[0], theta.shape[1]
    m_s, z_s, nz, n_phase = ints[I_MS], ints[I_ZS], ints[I_NZ], ints[I_NPHASE]
    age_cap, gyr = floats[F_AGE_CAP], floats[F_GYR]
    wm = np.empty(4)
    wz = np.empty(4)
    for i in range(n):
        out[i] = -np.inf
        lp = 0.0
        for j in range(ndim):
            lp += prior_logpdf(kinds[j], rows[j], theta[i, j])
        if not lp > -np.inf:
            continue
        mass = theta[i, ints[I_COL]] if ints[I_COL] >= 0 else floats[F_FIXED]
        Z = theta[i, ints[I_COL + 1]] if ints[I_COL + 1] >= 0 else floats[F_FIXED + 1]
        age = theta[i, ints[I_COL + 2]] if ints[I_COL + 2] >= 0 else floats[F_FIXED + 2]
        X = floats[F_X] if ints[I_FIXED_X] else 1.0 - (floats[F_YP] + floats[F_DYDZ] * Z) - Z
        if ints[I_CHECK_XZ] and not (X + Z <= 1.0):
            continue
        if ints[I_FEH]:
            zx = math.log10(Z / X) if (Z > 0.0 and X > 0.0) else np.nan
            d = (zx - floats[F_SOLAR_ZX] - floats[F_FEH_MEAN]) / floats[F_FEH_SIGMA]
            lp -= 0.5 * d * d
            if not (lp > -np.inf and lp < np.inf):
                continue
        # stencils in log M (M in M_sun) and log Z
        im = locate(m_nodes, m_inv, m_s, floats[F_MTOL], math.log10(mass) if mass > 0.0 else np.nan, wm)
        iz = locate(z_nodes, z_inv, z_s, floats[F_ZTOL], math.log10(Z) if Z > 0.0 else np.nan, wz)
        if im < 0 or iz < 0:
            continue
        s_life = 0.0
        for a in range(m_s):
            for b in range(z_s):
                s_life += wm[a] * wz[b] * log_life[(im + a) * nz + iz + b]
        life = 10.0 ** s_life  # s; NaN when a track of the stencil failed
        life_gyr = life / gyr
        # the support: 0 <= age <= min(t_MS, age cap); then the joint age-prior term
        if not (life_gyr == life_gyr) or not (age >= 0.0 and age <= min(life_gyr, age_cap)):
            continue
        lp -= math.log(min(life_gyr, age_cap) / age_cap)
        if ints[I_PRIOR_ONLY]:
            out[i] = lp
            continue
        # R and L at the phase age / t_MS: cubic in (log M, log Z), linear in phase, on their log10 values
        u = min(max(age * gyr / life, 0.0), 1.0) * (n_phase - 1)
        ip = min(int(u), n_phase - 2)
        fp = u - ip
        s_r = 0.0
        s_l = 0.0
        for a in range(m_s):
            for b in range(z_s):
                wab = wm[a] * wz[b]
                base = ((im + a) * nz + iz + b) * n_phase + ip
                s_r += wab * ((1.0 - fp) * log_r[base] + fp * log_r[base + 1])
                s_l += wab * ((1.0 - fp) * log_l[base] + fp * log_l[base + 1])
        R = 10.0 ** s_r
        L = 10.0 ** s_l
        if not (R > 0.0 and L > 0.0):
            continue
        T = (L / (floats[F_FOUR_PI_SIGMA] * R * R)) ** 0.25
        # Gaussian likelihood: the sum of log sigma is in F_LOG_SIG
        ll = -floats[F_LOG_SIG]
        for q, pred in ((0, R), (1, L), (2, T)):
            if ints[I_PRESENT + q]:
                z = (pred - floats[F_OBS + q]) / floats[F_SIG + q]
                ll -= 0.5 * z * z
        total = lp + ll
        if total > -np.inf and total < np.inf:
            out[i] = total
