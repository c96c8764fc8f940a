"""The engine's duck-typed target interface over a frozen scipy.stats distribution:
the outside reference that the check and life-figure tests compare against.
"""
import numpy as np


class ScipyTarget:
    """The engine's target interface over a frozen scipy.stats distribution (the reference)."""

    def __init__(self, frozen):
        self.frozen = frozen
        self.atoms = np.empty(0)

    def cdf(self, t):
        return self.frozen.cdf(t)

    def sf(self, t):
        return self.frozen.sf(t)

    def pdf(self, t):
        return self.frozen.pdf(t)

    def quantile(self, u):
        return self.frozen.ppf(u)

    @property
    def support(self):
        return tuple(float(v) for v in self.frozen.support())

    def mean(self):
        return float(self.frozen.mean())

    def var(self):
        return float(self.frozen.var())

    def moment(self, k):
        return float(self.frozen.moment(k))

    def describe(self):
        return f"scipy {self.frozen.dist.name}{self.frozen.args}{self.frozen.kwds}"
