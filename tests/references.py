"""Outside references for the shipped scenarios: each lifetime law written out here from
scipy.stats pieces and closed forms, never from lifedraw's own cdf, quantile or moments.

Every reference has the duck-typed face ``lifedraw.check`` takes as its target (cdf, sf,
quantile, mean, var, moment, atoms, support, describe), so the draws of any method can be
judged against it. Sources are named beside each law.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import integrate, stats


def bisect_quantile(cdf, sf, u, lo, hi, steps=200):
    """The smallest t with F(t) >= u, by vectorised bisection on [lo, hi] (judged on the sf
    above u = 1/2, where F has run out of digits); 200 halvings resolve any double bracket."""
    u = np.asarray(u, dtype=float)
    a = np.full(u.shape, float(lo))
    b = np.full(u.shape, float(hi))
    for _ in range(steps):
        m = 0.5 * (a + b)
        below = np.where(u < 0.5, cdf(m) < u, sf(m) > 1.0 - u)
        a = np.where(below, m, a)
        b = np.where(below, b, m)
    return b


class Reference:
    """A lifetime law from callables written in this file (the outside reference).

    ``raw_moments(k)`` gives E[T^k]; by default it is sum over k t^(k-1) S(t) dt from
    ``scipy.integrate.quad`` (for T >= 0), an independent computation.
    """

    def __init__(self, name, cdf, sf, support, upper, quantile=None, raw_moment=None, atoms=()):
        self.name = name
        self._cdf, self._sf = cdf, sf
        self.support = (float(support[0]), float(support[1]))
        self.upper = float(upper)           # bisection bracket: sf(upper) is below 1e-16
        self._quantile = quantile
        self._raw_moment = raw_moment
        self.atoms = np.asarray(atoms, dtype=float)
        self._moments: dict[int, float] = {}

    def cdf(self, t):
        return self._cdf(np.asarray(t, dtype=float))

    def sf(self, t):
        return self._sf(np.asarray(t, dtype=float))

    def quantile(self, u):
        if self._quantile is not None:
            return self._quantile(np.asarray(u, dtype=float))
        return bisect_quantile(self.cdf, self.sf, u, self.support[0], self.upper)

    def moment(self, k):
        if k not in self._moments:
            if self._raw_moment is not None:
                self._moments[k] = float(self._raw_moment(k))
            else:
                lo = self.support[0]
                f = (lambda t: k * t ** (k - 1) * float(self.sf(t)))
                pieces = np.unique(np.concatenate([[lo], self.quantile(np.array([0.5, 0.99, 1 - 1e-6])),
                                                   [self.upper]]))
                total = sum(integrate.quad(f, a, b, limit=400, epsabs=0, epsrel=1e-12)[0]
                            for a, b in zip(pieces[:-1], pieces[1:]))
                self._moments[k] = lo**k + total if lo > 0 else total
        return self._moments[k]

    def mean(self):
        return self.moment(1)

    def var(self):
        return self.moment(2) - self.moment(1) ** 2

    def describe(self):
        return f"outside reference: {self.name}"


def from_scipy(frozen, name):
    """A frozen scipy.stats law as a reference (its own ppf and moments)."""
    lo, hi = (float(v) for v in frozen.support())
    return Reference(f"scipy {name}", frozen.cdf, frozen.sf, (lo, hi), frozen.isf(1e-300) if math.isinf(hi) else hi,
                     quantile=frozen.ppf, raw_moment=frozen.moment)


def scipy_mixture(weights, parts, name):
    """sum_j w_j F_j written out from scipy.stats components (raw moments mix the same way)."""
    w = np.asarray(weights, dtype=float)
    w = w / w.sum()
    lo = min(float(p.support()[0]) for p in parts)
    upper = max(float(p.isf(1e-300)) for p in parts)
    return Reference(name, lambda t: sum(wj * p.cdf(t) for wj, p in zip(w, parts)),
                     lambda t: sum(wj * p.sf(t) for wj, p in zip(w, parts)), (lo, math.inf), upper,
                     raw_moment=lambda k: sum(wj * p.moment(k) for wj, p in zip(w, parts)))


# ---- the shipped scenarios, parameters restated from their TOML files ----------------------------

def gearbox_wearout():
    return from_scipy(stats.weibull_min(2.6, scale=31000.0), "weibull_min(2.6, scale=31000)")


def kiln_fan_belts():
    return from_scipy(stats.weibull_min(1.8, loc=1200.0, scale=4200.0), "weibull_min(1.8, loc=1200, scale=4200)")


def sensor_bathtub(weights=(0.08, 0.22, 0.70)):
    return scipy_mixture(weights, [stats.weibull_min(0.55, scale=40.0), stats.expon(scale=2400.0),
                                   stats.weibull_min(5.0, loc=300.0, scale=1500.0)],
                         f"scipy mixture {weights} of weibull_min(0.55, 40), expon(2400), weibull_min(5, 300, 1500)")


def pump_failure_modes():
    # Competing modes: R = R1 R2 R3 (NIST/SEMATECH e-Handbook 8.1.6.6, series model).
    parts = [stats.weibull_min(3.2, scale=14000.0), stats.lognorm(0.6, scale=math.exp(9.9)),
             stats.expon(scale=60000.0)]

    def sf(t):
        return parts[0].sf(t) * parts[1].sf(t) * parts[2].sf(t)
    return Reference("scipy min of weibull_min(3.2, 14000), lognorm(0.6, e^9.9), expon(60000)",
                     lambda t: -np.expm1(parts[0].logsf(t) + parts[1].logsf(t) + parts[2].logsf(t)),
                     sf, (0.0, math.inf), 60000.0 * 40)


def used_ferry_valves(beta=2.2, eta=15000.0, age=6000.0):
    # Residual life of a Weibull unit aged a: R(x) = R(a + x)/R(a) = exp((a/eta)^beta - ((a+x)/eta)^beta)
    # (NIST/SEMATECH e-Handbook 8.1.2.4); inverted by hand: x = eta ((a/eta)^beta - ln(1-u))^(1/beta) - a.
    c = (age / eta) ** beta

    def log_sf(x):
        return c - ((age + np.maximum(x, 0.0)) / eta) ** beta

    def quantile(u):
        return eta * (c - np.log1p(-u)) ** (1.0 / beta) - age
    return Reference(f"closed-form residual Weibull({beta}, {eta}) at age {age}",
                     lambda x: -np.expm1(log_sf(x)), lambda x: np.exp(log_sf(x)), (0.0, math.inf),
                     eta * (c + 750.0) ** (1 / beta), quantile=quantile)


EBIKE_EDGES = np.array([0, 3, 6, 9, 12, 15, 18, 21, 24, 27, 30, 33, 36], dtype=float)
EBIKE_COUNTS = np.array([14, 6, 5, 7, 9, 13, 19, 26, 31, 27, 18, 9], dtype=float)


def histogram(edges=EBIKE_EDGES, counts=EBIKE_COUNTS):
    """Uniform within each bin: F is the straight line through (edge_i, cumulative share_i);
    E[T^k] = sum_i p_i (b^(k+1) - a^(k+1)) / ((k+1)(b - a)). Written here with numpy."""
    p = counts / counts.sum()
    cum = np.concatenate([[0.0], np.cumsum(p)])
    above = np.concatenate([np.cumsum(p[::-1])[::-1], [0.0]])
    a, b = edges[:-1], edges[1:]
    return Reference("histogram, uniform within bins (closed form)",
                     lambda t: np.interp(t, edges, cum), lambda t: np.interp(t, edges, above),
                     (edges[0], edges[-1]), edges[-1],
                     raw_moment=lambda k: float(np.sum(p * (b ** (k + 1) - a ** (k + 1)) / ((k + 1) * (b - a)))))


HYDRO_TIMES = np.array([5200, 8100, 9400, 11800, 12500, 14100, 15000, 16600, 17900, 19800, 21000, 22400,
                        23500, 24800, 26300, 27900, 29200, 31000, 33800, 36000], dtype=float)
HYDRO_CENSORED = np.array([0, 0, 1, 0, 0, 1, 0, 0, 1, 0, 0, 1, 0, 1, 0, 1, 0, 1, 1, 1], dtype=bool)


def hydro_gate_bushings():
    """Product-limit estimate from scipy.stats.ecdf on right-censored data (Kaplan & Meier 1958),
    with the mass beyond the last (censored) observation following scipy's censored maximum
    likelihood Weibull, conditioned on survival to that observation."""
    data = stats.CensoredData.right_censored(HYDRO_TIMES, HYDRO_CENSORED)
    km = stats.ecdf(data).sf
    fails = np.unique(HYDRO_TIMES[~HYDRO_CENSORED])
    surv = km.evaluate(fails)
    last = float(HYDRO_TIMES.max())
    tail_mass = float(surv[-1])
    shape, _, scale = stats.weibull_min.fit(data, floc=0)
    w = stats.weibull_min(shape, scale=scale)
    w_last = w.sf(last)

    def sf(t):
        t = np.asarray(t, dtype=float)
        return np.where(t < last, km.evaluate(np.minimum(t, last)), tail_mass * w.sf(t) / w_last)

    def quantile(u):
        u = np.asarray(u, dtype=float)
        cum = 1.0 - surv
        idx = np.searchsorted(cum, u - 1e-12)          # smallest failure time with F >= u (to rounding)
        atom = fails[np.minimum(idx, fails.size - 1)]
        v = np.clip((1.0 - u) / tail_mass, 1e-300, 1.0)
        tail = w.isf(v * w_last)
        return np.where(u > cum[-1] + 1e-12, tail, atom)

    def raw_moment(k):
        masses = -np.diff(np.concatenate([[1.0], surv]))
        beyond = integrate.quad(lambda t: t**k * w.pdf(t) / w_last, last, np.inf, epsrel=1e-12, limit=400)[0]
        return float(np.sum(masses * fails**k) + tail_mass * beyond)
    ref = Reference("scipy.stats.ecdf product-limit + scipy censored Weibull tail",
                    lambda t: 1.0 - sf(t), sf, (0.0, math.inf), w.isf(1e-300), quantile=quantile,
                    raw_moment=raw_moment, atoms=fails)
    ref.tail_mass, ref.tail_shape, ref.tail_scale = tail_mass, shape, scale
    return ref


def streetlight_driver_hazard(a=0.004, b=0.5, c=4e-6, d=2e-7, tau=15000.0):
    # h = a b t^(b-1) + c + d e^(t/tau) integrates to H = a t^b + c t + d tau (e^(t/tau) - 1);
    # R = exp(-H) (NIST/SEMATECH e-Handbook 8.1.2.4).
    def H(t):
        t = np.maximum(t, 0.0)
        return a * t**b + c * t + d * tau * np.expm1(t / tau)
    return Reference("closed-form cumulative hazard a t^b + c t + d tau (e^(t/tau) - 1)",
                     lambda t: -np.expm1(-H(t)), lambda t: np.exp(-H(t)), (0.0, math.inf), 250_000.0)


def compressor_density(k=2.5, p=1.6, s=9000.0):
    # f ∝ t^(k-1) exp(-(t/s)^p) is Stacy's generalised gamma: scipy gengamma(a = k/p, c = p, scale = s).
    return from_scipy(stats.gengamma(k / p, p, scale=s), f"gengamma(a={k}/{p}, c={p}, scale={s})")


def pump_weibull():
    return from_scipy(stats.weibull_min(1.9, scale=18000.0), "weibull_min(1.9, scale=18000)")


#: scenario name -> its outside reference (the pumping station's [model] is the pump's law).
SCENARIO_REFERENCES = {
    "gearbox-wearout": gearbox_wearout,
    "kiln-fan-belts": kiln_fan_belts,
    "sensor-bathtub": sensor_bathtub,
    "pump-failure-modes": pump_failure_modes,
    "used-ferry-valves": used_ferry_valves,
    "ebike-battery-returns": histogram,
    "hydro-gate-bushings": hydro_gate_bushings,
    "streetlight-driver-hazard": streetlight_driver_hazard,
    "compressor-density": compressor_density,
    "pumping-station-system": pump_weibull,
}


def variance_z(x, reference) -> float:
    """z-score of the sample variance against the reference's: Var(s^2) ~ (mu4 - sigma^4)/n
    for large n (the delta method; e.g. Cramér 1946, sec. 27.4, from memory)."""
    m1, m2, m3, m4 = (reference.moment(k) for k in (1, 2, 3, 4))
    var = m2 - m1**2
    mu4 = m4 - 4 * m1 * m3 + 6 * m1**2 * m2 - 3 * m1**4
    x = np.asarray(x, dtype=float)
    return float((np.var(x, ddof=1) - var) / math.sqrt((mu4 - var**2) / x.size))


#: The suite's verdict on draws: lifedraw.check's rule (every p-value >= 1e-3, |z| < 5 for the
#: mean and the tail fractions, u-error within ``u_tolerance`` when given) plus |z| < 5 for the
#: sample variance, where KS is weak (a 1 % sd error is a 2 % variance error).
Z_MAX = 5.0


def verdict(sampler, ref, n, seed, u_tolerance=None):
    """(passed, why): the draws of ``sampler`` judged against the outside reference ``ref``."""
    from lifedraw import engine
    report = engine.check(sampler, ref, n=n, rng=seed)
    if not report.passed(u_tolerance=u_tolerance):
        return False, report.summary()
    z = variance_z(sampler.sample(n, seed + 1), ref)
    if not abs(z) < Z_MAX:
        return False, f"variance z = {z:.2f}"
    return True, ""
