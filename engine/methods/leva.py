"""Leva's normal generator: ratio-of-uniforms for the standard normal with two quadratic
squeezes, serving the normal family (mean + sd·Z) and the lognormal (location + exp(mu + sigma·Z)).

J. L. Leva (1992), "A fast normal random number generator", ACM TOMS 18(4) 449-453: the
Kinderman & Monahan (1977) rectangle for exp(-z^2/2), with an inner and an outer ellipse
q(u, v) = r1, r2 around the boundary v^2 = -4 u^2 ln u, so that the logarithm is needed
for about 1.2% of the deviates.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from .. import kernels
from ..errors import MethodNotApplicable
from ..target import Target
from .base import Sampler

# Leva (1992), the algorithm's constants: centre (s, t) and coefficients (a, b) of the
# quadratic q = x^2 + y (a y - b x), x = u - s, y = |v| - t; q < r1 lies inside
# A (accept), q > r2 outside (reject).
S, T = 0.449871, -0.386595
A, B = 0.19600, 0.25472
R1, R2 = 0.27597, 0.27846
#: Width of Leva's v-range, v = 1.7156 (U - 1/2): just above 2 sqrt(2/e) = 1.71553,
#: the Kinderman & Monahan (1977) bound for exp(-z^2/2), so the rectangle encloses A.
V_SPAN = 1.7156
#: area(A) for exp(-z^2/2) is sqrt(2 pi)/2 (Kinderman & Monahan 1977); rectangle area 1 x V_SPAN.
ACCEPTANCE = math.sqrt(2.0 * math.pi) / 2.0 / V_SPAN
#: Candidates per block: 2 x 32,768 uniforms (512 kB) stay in the processor's cache between
#: numpy's fill and the test. Measured on the bench machine: 8,192 to 131,072 all within 2%
#: of each other, 2,048 about 8% slower (the per-block Python call shows).
BLOCK = 32_768


def leva_applies(target: Target) -> bool:
    """True for the normal and lognormal families, which Leva's generator draws exactly."""
    fam = getattr(target, "fam", None)
    return target.kind == "family" and fam is not None and fam.name in ("normal", "lognormal")


class LevaNormal(Sampler):
    """Ratio-of-uniforms for the normal with Leva's quadratic squeezes (vectorised over batches)."""

    method = "ratio-of-uniforms"
    reference = ("Leva (1992), ACM TOMS 18(4):449-453, on the ratio-of-uniforms method of "
                 "Kinderman & Monahan (1977), ACM TOMS 3(3):257-260")

    @classmethod
    def check_applicable(cls, target: Target) -> None:
        if not leva_applies(target):
            raise MethodNotApplicable("method", "Leva's generator draws normal deviates; it serves the normal "
                                                "and lognormal families only")

    def _setup(self) -> None:
        self._install()

    def _install(self) -> None:
        p = self.target.params
        self.family = self.target.fam.name
        self.extra_stats.update({"variant": "Leva 1992 quadratic squeezes", "envelope": "rectangle",
                                 "squeeze": "inner and outer ellipse (Leva 1992)",
                                 "expected_acceptance": ACCEPTANCE, "hat_area": 1.0 / ACCEPTANCE,
                                 "transform": ("mean + sd·Z" if self.family == "normal"
                                               else "location + exp(mu + sigma·Z)")})
        if self.family == "normal":
            self._loc, self._scale = p["mean"], p["sd"]
        else:
            self._loc, self._mu, self._sigma = p["location"], p["mu"], p["sigma"]

    # ---- drawing -----------------------------------------------------------------------
    @staticmethod
    def _candidates(pairs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # Two uniforms per candidate, read in pairs (the compiled test reads them in the
        # same order). 1 - U lies in (0, 1]: u > 0 keeps v/u finite and ln u defined.
        u = 1.0 - pairs[0::2]
        v = pairs[1::2] - 0.5
        v *= V_SPAN
        return u, v

    @staticmethod
    def _classify(u, v):
        """inner-squeezed and accepted masks, and the indices where the logarithm was needed."""
        x = u - S
        y = np.abs(v)
        y -= T
        q = y * A
        q -= B * x
        q *= y
        x *= x
        q += x                      # q = x^2 + y (a y - b x), in place to spare temporaries
        inner = q < R1
        # r1 <= q <= r2: between the ellipses only the exact test decides.
        between = np.flatnonzero((q <= R2) ^ inner)
        ub, vb = u[between], v[between]
        # The exact boundary of A for exp(-z^2/2): v^2 <= -4 u^2 ln u (Kinderman & Monahan 1977).
        passed = vb * vb <= -4.0 * ub * ub * np.log(ub)
        accepted = inner.copy()
        accepted[between[passed]] = True
        return inner, accepted, between.size

    def standard_normal(self, m: int, rng: np.random.Generator, out: np.ndarray | None = None) -> np.ndarray:
        """m standard normal deviates Z = V/U (into ``out`` if given), counting the cost.

        Candidates are drawn in blocks of at most BLOCK (numpy's fill of 2 b uniforms, read
        in pairs) and tested in order, the accepted ones stored in order until ``out`` is
        full; the compiled test (engine.kernels.leva_block) and the numpy one below take the
        same uniforms and keep the same deviates. The block fits the processor's cache, so
        the uniforms are read back from there rather than from memory.
        """
        out = np.empty(m) if out is None else out
        filled = 0
        pairs = marks = None
        while filled < m:
            need = m - filled
            # About one binomial sd more candidates than the shortfall needs: a second
            # (small) block is rare for small requests.
            b = min(BLOCK, int(need / ACCEPTANCE + math.sqrt(need) + 16))
            if pairs is None or pairs.size < 2 * b:
                pairs, marks = np.empty(2 * b), np.empty(b, dtype=np.uint8)
            block = pairs[:2 * b]
            rng.random(out=block)
            got, accepted, squeezed, logs = self._test_block(block, marks[:b], out, filled)
            self.counts["uniforms"] += 2 * b
            self.counts["candidates"] += b
            self.counts["squeezed"] += squeezed
            self.counts["accepted"] += accepted
            self.counts["log_evals"] += logs
            self.counts["density_evals"] += logs
            filled += got
        return out

    def _test_block(self, block, marks, out, start):
        """(stored, accepted, squeezed, logs) for one block of candidate pairs."""
        if kernels.HAVE_JIT:
            return kernels.leva_block(block, marks, out, start, (S, T, A, B, R1, R2, V_SPAN))
        u, v = self._candidates(block)
        inner, accepted, logs = self._classify(u, v)
        take = np.flatnonzero(accepted)[:out.size - start]
        z = v.take(take)
        z /= u.take(take)
        out[start:start + z.size] = z
        return z.size, int(np.count_nonzero(accepted)), int(np.count_nonzero(inner)), logs

    def _fill(self, out, rng):
        z = self.standard_normal(out.size, rng, out=out)
        if self.family == "normal":
            z *= self._scale
        else:
            z *= self._sigma
            z += self._mu
            np.exp(z, out=z)
        z += self._loc

    # ---- pictures and persistence --------------------------------------------------------
    @staticmethod
    def _ellipse(r: float, n: int) -> tuple[np.ndarray, np.ndarray]:
        """The squeeze boundary q = r in (u, v): the ellipse part with |v| >= 0, mirrored."""
        phi = np.linspace(0.0, 2.0 * np.pi, 4 * n, endpoint=False)
        c, s = np.cos(phi), np.sin(phi)
        rad = np.sqrt(r / (c * c - B * c * s + A * s * s))
        x, y = rad * c, rad * s
        upper = y >= -T
        # Start the walk round the ellipse outside the arc, so the arc comes out in one piece.
        shift = -int(np.flatnonzero(~upper)[0])
        x, y, upper = np.roll(x, shift), np.roll(y, shift), np.roll(upper, shift)
        u, v = x[upper] + S, y[upper] + T
        return np.concatenate([u, u[::-1]]), np.concatenate([v, -v[::-1]])

    def geometry(self, n_points: int = 400, rng=0) -> dict[str, Any]:
        z = np.linspace(-8.0, 8.0, max(n_points, 50))
        bu = np.exp(-z * z / 4.0)
        rng = np.random.default_rng(rng)
        u, v = self._candidates(rng.random(2 * n_points))
        inner, accepted, _ = self._classify(u, v)
        label = np.where(inner, "squeeze", np.where(accepted, "accepted", "rejected"))
        iu, iv = self._ellipse(R1, n_points)
        ou, ov = self._ellipse(R2, n_points)
        h = V_SPAN / 2.0
        return {"method": self.method, "variant": "Leva 1992 quadratic squeezes", "envelope": "rectangle",
                "coordinates": "standard normal: z = v/u, density exp(-z^2/2) unnormalised",
                "mode": 0.0, "boundary_x": z, "boundary_u": bu, "boundary_v": z * bu,
                "u_plus": 1.0, "v_minus": -h, "v_plus": h,
                "rectangle_u": np.array([0.0, 1.0, 1.0, 0.0, 0.0]),
                "rectangle_v": np.array([-h, -h, h, h, -h]),
                "inner_u": iu, "inner_v": iv, "outer_u": ou, "outer_v": ov,
                "candidates_u": u, "candidates_v": v, "candidates_label": label}

    def _meta(self):
        return {"variant": "Leva 1992 quadratic squeezes"}

    def _restore(self, meta, tables):
        self._install()
