"""Textbook lifetime families in the reliability parameterisation, in closed form.

Parameterisations and formulas follow the NIST/SEMATECH e-Handbook of Statistical
Methods, section 8.1.6 ("What are the basic lifetime distribution models used
for non-repairable populations?"), and Meeker & Escobar, Statistical Methods for
Reliability Data (1998), ch. 4.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import special

from .errors import ModelError, finite_number
from .target import Target

EULER_GAMMA = 0.5772156649015329  # Euler-Mascheroni constant
APERY = 1.2020569031595942        # zeta(3)


@dataclass(frozen=True)
class Param:
    name: str
    symbol: str
    meaning: str
    positive: bool = True
    default: float | None = None  # None: required


@dataclass(frozen=True)
class Family:
    """One family: its parameters and the standardised functions of z = (t - loc)/scale.

    Each function takes (z, shape_params) where z is the standardised age; the
    location-scale wrapper in FamilyTarget does the rest.
    """

    name: str
    title: str
    params: tuple[Param, ...]
    formula: str
    location_key: str | None       # parameter acting as location (None: fixed at 0)
    scale_key: str | None
    z_support: tuple[float, float]
    logpdf: Callable
    cdf: Callable
    sf: Callable
    quantile: Callable
    hazard: Callable | None
    std_moment: Callable            # E[Z^k] of the standardised variable (inf if divergent)
    std_mode: Callable
    pole: Callable = lambda p: False  # density unbounded at the lower end?
    isf: Callable | None = None       # quantile from the upper tail probability
    logsf: Callable | None = None     # log R(z) where R underflows long before the hazard does


def _weibull_params(p):
    return p["shape"]


def _w_logpdf(z, p):
    b = p["shape"]
    return math.log(b) + (b - 1) * np.log(z) - z**b


def _w_moment(k, p):
    return special.gamma(1 + k / p["shape"])


def _w_mode(p):
    b = p["shape"]
    return ((b - 1) / b) ** (1 / b) if b > 1 else 0.0


def _ln_logpdf(z, p):
    s = p["sigma"]
    x = (np.log(z) - p["mu"]) / s
    return -0.5 * x * x - math.log(s * math.sqrt(2 * math.pi)) - np.log(z)


def _gamma_logpdf(z, p):
    k = p["shape"]
    return (k - 1) * np.log(z) - z - special.gammaln(k)


def _ll_logpdf(z, p):
    b = p["shape"]
    lz = np.log(z)
    # log f = log b + (b-1) log z - 2 log(1 + z^b), written with logaddexp for large z
    return math.log(b) + (b - 1) * lz - 2 * np.logaddexp(0.0, b * lz)


def _ll_moment(k, p):
    b = p["shape"]
    if k >= b:
        return math.inf
    x = k * math.pi / b
    return x / math.sin(x) if k else 1.0


def _bs_xi(z, a):
    r = np.sqrt(z)
    return (r - 1.0 / r) / a


def _bs_logpdf(z, p):
    a = p["shape"]
    xi = _bs_xi(z, a)
    r = np.sqrt(z)
    return -0.5 * xi * xi - 0.5 * math.log(2 * math.pi) + np.log((r + 1.0 / r) / (2 * a * z))


def _bs_quantile(u, p):
    a = p["shape"]
    w = a * special.ndtri(u)
    return 0.25 * (w + np.sqrt(w * w + 4.0)) ** 2


def _bs_isf(v, p):
    a = p["shape"]
    w = -a * special.ndtri(v)
    return 0.25 * (w + np.sqrt(w * w + 4.0)) ** 2


def _bs_moment(k, p):
    a = p["shape"]
    # Moments of the Birnbaum-Saunders law (Birnbaum & Saunders 1969, J. Appl. Prob. 6).
    table = {0: 1.0, 1: 1 + a * a / 2, 2: 1 + 2 * a * a + 1.5 * a**4,
             3: 1 + 4.5 * a * a + 9 * a**4 + 7.5 * a**6}
    return table.get(k, math.nan)


def _normal_moment(k, p):
    return {0: 1.0, 1: 0.0, 2: 1.0, 3: 0.0, 4: 3.0}.get(k, math.nan)


def _sev_moment(k, p):
    # Z = -G with G standard Gumbel (largest extreme value): E[G] = gamma_E,
    # E[G^2] = gamma_E^2 + pi^2/6, E[G^3] = gamma_E^3 + gamma_E*pi^2/2 + 2*zeta(3).
    g = EULER_GAMMA
    m = {0: 1.0, 1: -g, 2: g * g + math.pi**2 / 6,
         3: -(g**3 + g * math.pi**2 / 2 + 2 * APERY)}
    return m.get(k, math.nan)


FAMILIES: dict[str, Family] = {}


def _register(f: Family):
    FAMILIES[f.name] = f


_register(Family(
    name="weibull", title="Weibull",
    params=(Param("shape", "beta", "shape (slope); < 1 early failures, 1 random, > 1 wear-out"),
            Param("scale", "eta", "characteristic life (63.2% failed)"),
            Param("location", "gamma", "failure-free period", positive=False, default=0.0)),
    formula="F(t) = 1 - exp(-((t - gamma)/eta)^beta), t > gamma",
    location_key="location", scale_key="scale", z_support=(0.0, math.inf),
    logpdf=_w_logpdf,
    cdf=lambda z, p: -np.expm1(-z ** p["shape"]),
    sf=lambda z, p: np.exp(-z ** p["shape"]),
    quantile=lambda u, p: (-np.log1p(-u)) ** (1 / p["shape"]),
    isf=lambda v, p: (-np.log(v)) ** (1 / p["shape"]),
    hazard=lambda z, p: p["shape"] * z ** (p["shape"] - 1),
    std_moment=_w_moment, std_mode=_w_mode, pole=lambda p: p["shape"] < 1,
))

_register(Family(
    name="exponential", title="Exponential",
    params=(Param("scale", "theta", "mean life (1/failure rate)"),
            Param("location", "gamma", "failure-free period", positive=False, default=0.0)),
    formula="F(t) = 1 - exp(-(t - gamma)/theta), t > gamma",
    location_key="location", scale_key="scale", z_support=(0.0, math.inf),
    logpdf=lambda z, p: -z,
    cdf=lambda z, p: -np.expm1(-z),
    sf=lambda z, p: np.exp(-z),
    quantile=lambda u, p: -np.log1p(-u),
    isf=lambda v, p: -np.log(v),
    hazard=lambda z, p: np.ones_like(z),
    std_moment=lambda k, p: float(math.factorial(k)), std_mode=lambda p: 0.0,
))

_register(Family(
    name="lognormal", title="Lognormal",
    params=(Param("mu", "mu", "mean of ln(t - location)", positive=False),
            Param("sigma", "sigma", "standard deviation of ln(t - location)"),
            Param("location", "gamma", "failure-free period", positive=False, default=0.0)),
    formula="F(t) = Phi((ln(t - gamma) - mu)/sigma), t > gamma",
    location_key="location", scale_key=None, z_support=(0.0, math.inf),
    logpdf=_ln_logpdf,
    cdf=lambda z, p: special.ndtr((np.log(z) - p["mu"]) / p["sigma"]),
    sf=lambda z, p: special.ndtr(-(np.log(z) - p["mu"]) / p["sigma"]),
    quantile=lambda u, p: np.exp(p["mu"] + p["sigma"] * special.ndtri(u)),
    isf=lambda v, p: np.exp(p["mu"] - p["sigma"] * special.ndtri(v)),
    logsf=lambda z, p: special.log_ndtr(-(np.log(z) - p["mu"]) / p["sigma"]),
    hazard=None,
    std_moment=lambda k, p: math.exp(k * p["mu"] + 0.5 * (k * p["sigma"]) ** 2),
    std_mode=lambda p: math.exp(p["mu"] - p["sigma"] ** 2),
))

_register(Family(
    name="gamma", title="Gamma",
    params=(Param("shape", "k", "shape; an integer k is the time to the k-th shock"),
            Param("scale", "theta", "scale"),
            Param("location", "gamma", "failure-free period", positive=False, default=0.0)),
    formula="f(t) = x^(k-1) exp(-x) / (Gamma(k) theta), x = (t - gamma)/theta",
    location_key="location", scale_key="scale", z_support=(0.0, math.inf),
    logpdf=_gamma_logpdf,
    cdf=lambda z, p: special.gammainc(p["shape"], z),
    sf=lambda z, p: special.gammaincc(p["shape"], z),
    quantile=lambda u, p: special.gammaincinv(p["shape"], u),
    isf=lambda v, p: special.gammainccinv(p["shape"], v),
    hazard=None,
    # Gamma(k + a)/Gamma(a) as the rising factorial (scipy.special.poch): a difference of two
    # gammaln values would lose every digit for a large shape (1e20 gave a mean of 1).
    std_moment=lambda k, p: float(special.poch(p["shape"], k)),
    std_mode=lambda p: max(p["shape"] - 1.0, 0.0), pole=lambda p: p["shape"] < 1,
))

_register(Family(
    name="normal", title="Normal",
    params=(Param("mean", "mu", "mean life", positive=False),
            Param("sd", "sigma", "standard deviation")),
    formula="F(t) = Phi((t - mu)/sigma)",
    location_key="mean", scale_key="sd", z_support=(-math.inf, math.inf),
    logpdf=lambda z, p: -0.5 * z * z - 0.5 * math.log(2 * math.pi),
    cdf=lambda z, p: special.ndtr(z),
    sf=lambda z, p: special.ndtr(-z),
    quantile=lambda u, p: special.ndtri(u),
    isf=lambda v, p: -special.ndtri(v),
    logsf=lambda z, p: special.log_ndtr(-z),
    hazard=None,
    std_moment=_normal_moment, std_mode=lambda p: 0.0,
))

_register(Family(
    name="loglogistic", title="Log-logistic",
    params=(Param("shape", "beta", "shape"),
            Param("scale", "alpha", "median life")),
    formula="F(t) = 1 / (1 + (t/alpha)^(-beta)), t > 0",
    location_key=None, scale_key="scale", z_support=(0.0, math.inf),
    logpdf=_ll_logpdf,
    cdf=lambda z, p: special.expit(p["shape"] * np.log(z)),
    sf=lambda z, p: special.expit(-p["shape"] * np.log(z)),
    quantile=lambda u, p: np.exp((np.log(u) - np.log1p(-u)) / p["shape"]),
    isf=lambda v, p: np.exp((np.log1p(-v) - np.log(v)) / p["shape"]),
    hazard=lambda z, p: p["shape"] * z ** (p["shape"] - 1) / (1 + z ** p["shape"]),
    std_moment=_ll_moment,
    std_mode=lambda p: ((p["shape"] - 1) / (p["shape"] + 1)) ** (1 / p["shape"]) if p["shape"] > 1 else 0.0,
    pole=lambda p: p["shape"] < 1,
))

_register(Family(
    name="smallest_extreme_value", title="Smallest extreme value",
    params=(Param("location", "mu", "location (mode)", positive=False),
            Param("scale", "sigma", "scale")),
    formula="F(t) = 1 - exp(-exp((t - mu)/sigma))",
    location_key="location", scale_key="scale", z_support=(-math.inf, math.inf),
    logpdf=lambda z, p: z - np.exp(z),
    cdf=lambda z, p: -np.expm1(-np.exp(z)),
    sf=lambda z, p: np.exp(-np.exp(z)),
    quantile=lambda u, p: np.log(-np.log1p(-u)),
    isf=lambda v, p: np.log(-np.log(v)),
    hazard=lambda z, p: np.exp(z),
    std_moment=_sev_moment, std_mode=lambda p: 0.0,
))

_register(Family(
    name="birnbaum_saunders", title="Birnbaum-Saunders (fatigue life)",
    params=(Param("shape", "alpha", "shape"),
            Param("scale", "beta", "median life")),
    formula="F(t) = Phi((sqrt(t/beta) - sqrt(beta/t))/alpha), t > 0",
    location_key=None, scale_key="scale", z_support=(0.0, math.inf),
    logpdf=_bs_logpdf,
    cdf=lambda z, p: special.ndtr(_bs_xi(z, p["shape"])),
    sf=lambda z, p: special.ndtr(-_bs_xi(z, p["shape"])),
    quantile=_bs_quantile, isf=_bs_isf,
    logsf=lambda z, p: special.log_ndtr(-_bs_xi(z, p["shape"])),
    hazard=None,
    std_moment=_bs_moment, std_mode=lambda p: math.nan,
))


def family_names() -> list[str]:
    return sorted(FAMILIES)


class FamilyTarget(Target):
    """A member of one of the textbook families, with closed forms throughout."""

    kind = "family"
    exact_quantile = True

    def __init__(self, name: str, **params):
        key = str(name).strip().lower().replace("-", "_").replace(" ", "_")
        if key not in FAMILIES:
            raise ModelError("family", f"unknown family {name!r}; known: {', '.join(family_names())}")
        fam = FAMILIES[key]
        known = {p.name for p in fam.params}
        for extra in params:
            if extra not in known:
                raise ModelError(extra, f"not a parameter of the {fam.title} family "
                                        f"(parameters: {', '.join(p.name for p in fam.params)})")
        values = {}
        for p in fam.params:
            if p.name not in params:
                if p.default is None:
                    raise ModelError(p.name, f"required by the {fam.title} family")
                values[p.name] = p.default
            else:
                values[p.name] = finite_number(p.name, params[p.name], positive=p.positive)
        self.fam = fam
        self.loc = values[fam.location_key] if fam.location_key else 0.0
        self.scale = values[fam.scale_key] if fam.scale_key else 1.0
        zlo, zhi = fam.z_support
        super().__init__((self.loc + self.scale * zlo, self.loc + self.scale * zhi), values)
        self.pole_at_lower = bool(fam.pole(values))
        self._check_draws_representable()

    def _check_draws_representable(self) -> None:
        """Refuse parameters whose draws overflow: the smallest uniform a generator gives
        (2^-53) must map to a finite age at both ends (Weibull shape 0.001 drew 13% infinities)."""
        lo, hi = self.support
        tiny = np.array([2.0 ** -53])
        with np.errstate(all="ignore"):
            top = float(np.asarray(self._isf(tiny)).ravel()[0])
            bottom = float(np.asarray(self._quantile(tiny)).ravel()[0])
        field = next((k for k in ("shape", "mu", "sigma") if k in self.params), self.fam.scale_key or "params")
        values = ", ".join(f"{k} = {v:.6g}" for k, v in self.params.items())
        if not math.isfinite(top) or (math.isfinite(hi) and top > hi):
            raise ModelError(field, f"with {values} the {self.fam.title} law's upper tail lies beyond double "
                                    f"precision: some draws would be infinite (the 1 - 2^-53 quantile is {top:g})")
        if not math.isfinite(bottom):
            raise ModelError(field, f"with {values} the {self.fam.title} law's lower tail lies beyond double "
                                    "precision: some draws would be infinite")

    # z is the standardised age.
    def _z(self, t):
        return (t - self.loc) / self.scale

    def _pdf(self, t):
        return np.exp(self.fam.logpdf(self._z(t), self.params)) / self.scale

    def _logpdf(self, t):
        return self.fam.logpdf(self._z(t), self.params) - math.log(self.scale)

    def _cdf(self, t):
        return self.fam.cdf(self._z(t), self.params)

    def _sf(self, t):
        return self.fam.sf(self._z(t), self.params)

    def _hazard(self, t):
        z = self._z(t)
        if self.fam.hazard is not None:
            return self.fam.hazard(z, self.params) / self.scale
        # h = f/R through logs, so the far tail neither underflows nor divides 0/0.
        with np.errstate(divide="ignore"):
            logsf = (self.fam.logsf(z, self.params) if self.fam.logsf is not None
                     else np.log(self.fam.sf(z, self.params)))
            return np.exp(self.fam.logpdf(z, self.params) - logsf) / self.scale

    def _quantile(self, u):
        u = np.asarray(u, dtype=float)
        z = self.fam.quantile(u, self.params)
        if self.fam.isf is not None:
            upper = u > 0.5
            if np.any(upper):
                z = np.where(upper, self.fam.isf(1.0 - u, self.params), z)
        return self.loc + self.scale * z

    def _isf(self, v):
        v = np.asarray(v, dtype=float)
        if self.fam.isf is None:
            return self.quantile(1.0 - v)
        lo, hi = self.support
        with np.errstate(divide="ignore"):
            z = np.where(v < 0.5, self.fam.isf(v, self.params), self.fam.quantile(1.0 - v, self.params))
        out = self.loc + self.scale * z
        return np.where(v <= 0, hi, np.where(v >= 1, lo, out))

    def moment(self, k: int) -> float:
        # E[(loc + scale*Z)^k] by the binomial expansion of standardised moments.
        total = 0.0
        for j in range(k + 1):
            mj = self.fam.std_moment(j, self.params)
            if mj is None or (isinstance(mj, float) and math.isnan(mj)):
                return super().moment(k)
            if not math.isfinite(mj):
                return math.inf
            total += math.comb(k, j) * self.loc ** (k - j) * self.scale**j * mj
        return float(total)

    def var(self) -> float:
        m1, m2 = self.fam.std_moment(1, self.params), self.fam.std_moment(2, self.params)
        if not (math.isfinite(m1) and math.isfinite(m2)):
            return math.inf
        return float(self.scale**2 * (m2 - m1 * m1))

    def mode(self) -> float:
        m = self.fam.std_mode(self.params)
        if m is None or math.isnan(m):
            return super().mode()
        return float(self.loc + self.scale * m)

    def formula(self) -> str:
        return self.fam.formula

    def describe(self) -> str:
        parts = ", ".join(f"{p.name} ({p.symbol}) = {self.params[p.name]:.6g}" for p in self.fam.params)
        lines = [f"{self.fam.title} lifetime: {parts}.", self.fam.formula]
        if self.support[0] == -math.inf:
            neg = float(self.cdf(0.0))
            lines.append(f"The support includes negative ages; P(T < 0) = {neg:.3g}.")
        return "\n".join(lines)

    def spec(self) -> dict:
        return {"kind": "family", "family": self.fam.name, "params": dict(self.params)}
