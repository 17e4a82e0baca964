"""The peer side of the benchmark: dyad's joint model written again in
vectorised NumPy, independently of dyad's code but to the same equations.

What it is for: evaluating, for many walkers at once, the same log-posterior
as dyad-model's ``Model::log_posterior`` with its default priors (same
sampled coordinates, same priors and Jacobians, same fully normalised
Gaussian likelihood), so that emcee can sample exactly the density dyad
samples.

What it is not for: anything but this benchmark (no other priors, no
astrometry-only or velocity-only modes, no Cartesian astrometry).

Sources of the equations (all also in dyad's docs/DESIGN.md):
- Thiele-Innes constants and the elliptic rectangular coordinates
  X = cos E - e, Y = sqrt(1 - e^2) sin E (W. D. Heintz, Double Stars, 1978).
- Line-of-sight velocity shape cos(nu + omega) + e cos omega and
  K = 2 pi a sin i / (P sqrt(1 - e^2)) (R. W. Hilditch, An Introduction to
  Close Binary Stars, 2001, ch. 2).
- Kepler's third law with the IAU 2015 B3 nominal GM_sun and the IAU 2012 au.
- Kepler's equation by Newton iterations from E0 = M + 0.85 e sign(sin M)
  (J. M. A. Danby, Fundamentals of Celestial Mechanics, 1988, sect. 6.6).
"""

import csv
import math

import numpy as np

LN_2 = math.log(2.0)
LN_2PI = 1.8378770664093455  # ln(2 pi)
TAU = 2.0 * math.pi
DEG = math.pi / 180.0

# IAU 2015 Resolution B3 and IAU 2012 Resolution B2.
GM_SUN_M3_S2 = 1.3271244e20
AU_M = 149_597_870_700.0
AU_KM = AU_M / 1000.0
DAY_S = 86_400.0
JULIAN_YEAR_DAYS = 365.25
JULIAN_YEAR_S = JULIAN_YEAR_DAYS * DAY_S
GM_SUN_AU3_YR2 = GM_SUN_M3_S2 / (AU_M * AU_M * AU_M) * (JULIAN_YEAR_S * JULIAN_YEAR_S)
KEPLER_FACTOR = 4.0 * math.pi * math.pi / GM_SUN_AU3_YR2

# dyad-model's default priors (crates/dyad-model/src/params.rs, `defaults`).
PERIOD_DAYS = (0.1, 1.0e6)  # log-uniform
TOTAL_MASS_MSUN = (0.01, 1000.0)  # log-uniform
PARALLAX_MAS = (0.01, 1000.0)  # log-uniform
MASS_RATIO = (0.0, 1.0)  # uniform
OFFSET_KMS = (-1000.0, 1000.0)  # uniform
JITTER_KMS = (0.001, 10.0)  # log-uniform


def _ln_radial(rho):
    """ln of 2 g(rho), g the Gamma(k = 4, scale 1/4) density of rho = r^2."""
    k = 4.0
    return LN_2 + k * math.log(k) - math.log(6.0) + (k - 1.0) * np.log(rho) - k * rho


def _log_uniform_norm(lo, hi):
    return -math.log(math.log(hi) - math.log(lo))


def _rem_euclid(a, period):
    """a reduced to [0, period) as Rust's f64::rem_euclid (fmod, then shift)."""
    r = np.fmod(a, period)
    r = np.where(r < 0.0, r + period, r)
    return np.where(r >= period, 0.0, r)


def _round_half_away(q):
    """Rounding half away from zero (Rust's f64::round), elementwise."""
    t = np.trunc(q)
    frac = q - t
    return t + np.where(np.abs(frac) >= 0.5, np.sign(q), 0.0)


def wrap_angle(d):
    """Angle difference wrapped to (-pi, pi]."""
    r = d - TAU * _round_half_away(d / TAU)
    r = np.where(r <= -math.pi, r + TAU, r)
    return np.where(r > math.pi, r - TAU, r)


def solve_kepler(mean_anomaly, e, tol=1e-12, max_iter=60):
    """Eccentric anomaly for arrays of mean anomalies (rows share e[:, None]).

    Newton iterations E <- E - (E - e sin E - M) / (1 - e cos E) on the whole
    array until every correction is below `tol` (quadratic convergence: the
    error left after a correction of 1e-12 is at the rounding level).
    """
    E = mean_anomaly + 0.85 * e * np.sign(np.sin(mean_anomaly))
    for _ in range(max_iter):
        s = np.sin(E)
        c = np.cos(E)
        step = (E - e * s - mean_anomaly) / (1.0 - e * c)
        E = E - step
        if np.max(np.abs(step)) < tol:
            break
    return E


def _read_table(path):
    """Rows of a dyad CSV file as a structured array (lines starting with '#'
    are comments; the first other line is the header)."""
    with open(path, encoding="utf-8") as f:
        lines = [line for line in f if not line.startswith("#")]
    return np.genfromtxt(lines, delimiter=",", names=True, dtype=None, encoding="utf-8")


class JointModel:
    """Relative astrometry (polar) and velocities of both stars, any number
    of instruments, with dyad's default priors and sampled coordinates:

    ln P, sqrt(e) cos w, sqrt(e) sin w, phase_u, phase_v, cos i, node_u,
    node_v, ln M, parallax, q, then per instrument (order of first
    appearance in the velocity file) offset and ln jitter.
    """

    def __init__(self, positions_csv, velocities_csv):
        ast = _read_table(positions_csv)
        self.t_ast = np.asarray(ast["jd"], dtype=float)
        self.sep = np.asarray(ast["sep_mas"], dtype=float)
        self.pa = np.asarray(ast["pa_deg"], dtype=float) * DEG
        s1 = np.asarray(ast["sep_err_mas"], dtype=float)
        s2 = np.asarray(ast["pa_err_deg"], dtype=float) * DEG
        corr = np.asarray(ast["corr"], dtype=float)
        one_m_c2 = 1.0 - corr * corr
        self.c11 = 1.0 / (s1 * s1 * one_m_c2)
        self.c12 = -corr / (s1 * s2 * one_m_c2)
        self.c22 = 1.0 / (s2 * s2 * one_m_c2)
        # Full normalisation: -0.5 ln det(2 pi C) per epoch.
        self.ast_ln_norm = float(np.sum(-0.5 * (2.0 * LN_2PI + np.log(s1 * s1 * s2 * s2 * one_m_c2))))

        with open(velocities_csv, newline="") as f:
            rows = [r for r in csv.reader(line for line in f if not line.startswith("#"))]
        header, body = rows[0], rows[1:]
        col = {name: k for k, name in enumerate(header)}
        self.instruments = []
        for r in body:
            if r[col["instrument"]] not in self.instruments:
                self.instruments.append(r[col["instrument"]])
        rv = _read_table(velocities_csv)
        self.t_rv = np.asarray(rv["jd"], dtype=float)
        self.rv = np.asarray(rv["rv_kms"], dtype=float)
        err = np.asarray(rv["rv_err_kms"], dtype=float)
        self.err_sq = err * err
        self.is_primary = np.array([r[col["star"]] == "primary" for r in body])
        self.inst = np.array([self.instruments.index(r[col["instrument"]]) for r in body])
        # Mid-point of all epochs (dyad's default reference epoch of the phase).
        all_t = np.concatenate([self.t_ast, self.t_rv])
        self.t_ref = 0.5 * (all_t.min() + all_t.max())
        self.n_inst = len(self.instruments)
        self.names = [
            "ln_period_days", "sqrt_e_cos_omega", "sqrt_e_sin_omega", "phase_u", "phase_v",
            "cos_inclination", "node_u", "node_v", "ln_total_mass_msun", "parallax_mas",
            "mass_ratio",
        ]
        for name in self.instruments:
            self.names += [f"offset_kms[{name}]", f"ln_jitter_kms[{name}]"]
        self.dim = len(self.names)
        # All epochs in one array, so one Kepler solve serves both kinds of data.
        self.t_all = np.concatenate([self.t_ast, self.t_rv])
        self.n_ast = len(self.t_ast)

    @property
    def observation_count(self):
        return 2 * self.n_ast + len(self.t_rv)

    def log_prior(self, X):
        """ln prior in the sampled coordinates (Jacobians included), rows of X."""
        X = np.atleast_2d(X)
        with np.errstate(all="ignore"):
            s_p, ec, es, pu, pv, ci, nu, nv, s_m, plx, q = X[:, :11].T
            lp = np.zeros(len(X))
            ok = np.all(np.isfinite(X), axis=1)
            # Period: log-uniform in P, Jacobian dP/ds = P.
            P = np.exp(s_p)
            ok &= (P >= PERIOD_DAYS[0]) & (P <= PERIOD_DAYS[1])
            lp += _log_uniform_norm(*PERIOD_DAYS) - np.log(P) + s_p
            # (sqrt e cos w, sqrt e sin w): p = 2 p(e) p(w), e and w uniform.
            e = ec * ec + es * es
            ok &= e < 1.0
            lp += LN_2 - math.log(1.0) - math.log(TAU)
            # Phase and node 2-vectors: uniform angle; r^2 ~ Gamma(4, 1/4),
            # density in (u, v) = p(angle) * 2 g(r^2) (dyad-model params.rs).
            lp += -math.log(TAU) + _ln_radial(pu * pu + pv * pv)
            # Isotropic orientation: cos i uniform on [-1, 1].
            ok &= (ci >= -1.0) & (ci <= 1.0)
            lp += -LN_2
            lp += -math.log(TAU) + _ln_radial(nu * nu + nv * nv)
            M = np.exp(s_m)
            ok &= (M >= TOTAL_MASS_MSUN[0]) & (M <= TOTAL_MASS_MSUN[1])
            lp += _log_uniform_norm(*TOTAL_MASS_MSUN) - np.log(M) + s_m
            ok &= (plx >= PARALLAX_MAS[0]) & (plx <= PARALLAX_MAS[1])
            lp += _log_uniform_norm(*PARALLAX_MAS) - np.log(plx)
            ok &= (q >= MASS_RATIO[0]) & (q <= MASS_RATIO[1])
            lp += -math.log(MASS_RATIO[1] - MASS_RATIO[0])
            for k in range(self.n_inst):
                off = X[:, 11 + 2 * k]
                s_j = X[:, 12 + 2 * k]
                ok &= (off >= OFFSET_KMS[0]) & (off <= OFFSET_KMS[1])
                lp += -math.log(OFFSET_KMS[1] - OFFSET_KMS[0])
                jit = np.exp(s_j)
                ok &= (jit >= JITTER_KMS[0]) & (jit <= JITTER_KMS[1])
                lp += _log_uniform_norm(*JITTER_KMS) - np.log(jit) + s_j
            lp = np.where(ok & ~np.isnan(lp), lp, -np.inf)
        return lp

    def log_likelihood(self, X):
        """ln likelihood of rows of X (call only where the prior is finite)."""
        X = np.atleast_2d(X)
        s_p, ec, es, pu, pv, ci, nu, nv, s_m, plx, q = (X[:, k][:, None] for k in range(11))
        P = np.exp(s_p)
        e = ec * ec + es * es
        omega = _rem_euclid(np.arctan2(es, ec), TAU)
        lam = _rem_euclid(np.arctan2(pv, pu), TAU)
        # Time of periastron within half a period of the reference epoch.
        m_ref = _rem_euclid(lam - omega, TAU)
        m_ref = np.where(m_ref > math.pi, m_ref - TAU, m_ref)
        t_peri = self.t_ref - m_ref / TAU * P
        inc = np.arccos(ci)
        node = _rem_euclid(np.arctan2(nv, nu), TAU)
        M = np.exp(s_m)
        p_yr = P / JULIAN_YEAR_DAYS
        a_au = np.cbrt(M * p_yr * p_yr / KEPLER_FACTOR)
        a_mas = a_au * plx
        # Thiele-Innes constants (Heintz 1978).
        sw, cw = np.sin(omega), np.cos(omega)
        sn, cn = np.sin(node), np.cos(node)
        cosi = np.cos(inc)
        A = a_mas * (cw * cn - sw * sn * cosi)
        B = a_mas * (cw * sn + sw * cn * cosi)
        F = a_mas * (-sw * cn - cw * sn * cosi)
        G = a_mas * (-sw * sn + cw * cn * cosi)
        # Mean anomaly reduced to [-pi, pi] on the phase (t - T) / P.
        phase = (self.t_all[None, :] - t_peri) * (1.0 / P)
        mean_anomaly = TAU * (phase - np.rint(phase))
        E = solve_kepler(mean_anomaly, e)
        sE, cE = np.sin(E), np.cos(E)
        x = cE - e
        y = np.sqrt((1.0 - e) * (1.0 + e)) * sE
        na = self.n_ast
        xa, ya = x[:, :na], y[:, :na]
        dra = B * xa + G * ya
        ddec = A * xa + F * ya
        r1 = self.sep - np.hypot(dra, ddec)
        r2 = wrap_angle(self.pa - np.arctan2(dra, ddec))
        chi2 = np.sum(self.c11 * r1 * r1 + 2.0 * self.c12 * r1 * r2 + self.c22 * r2 * r2, axis=1)
        ll = self.ast_ln_norm - 0.5 * chi2
        # Velocities: v1 = gamma - q/(1+q) K shape, v2 = gamma + K/(1+q) shape.
        xv, yv, cv = x[:, na:], y[:, na:], cE[:, na:]
        shape = (xv * cw - yv * sw) / (1.0 - e * cv) + e * cw
        K = 2.0 * math.pi * a_au * AU_KM * np.sin(inc) / (P * DAY_S * np.sqrt(1.0 - e * e))
        c1 = 0.0 - q / (1.0 + q) * K
        c2 = 0.0 + K / (1.0 + q)
        factor = np.where(self.is_primary[None, :], c1, c2)
        gamma = X[:, 11 + 2 * self.inst]
        jitter = np.exp(X[:, 12 + 2 * self.inst])
        var = self.err_sq + jitter * jitter
        r = self.rv - (gamma + factor * shape)
        ll = ll - 0.5 * np.sum(r * r / var + LN_2PI + np.log(var), axis=1)
        return np.where(np.isnan(ll), -np.inf, ll)

    def log_posterior(self, X):
        """ln prior + ln likelihood for each row of X; -inf outside the support."""
        X = np.atleast_2d(X)
        lp = self.log_prior(X)
        good = np.isfinite(lp)
        out = np.full(len(X), -np.inf)
        if np.any(good):
            out[good] = lp[good] + self.log_likelihood(X[good])
        return np.where(np.isnan(out), -np.inf, out)
