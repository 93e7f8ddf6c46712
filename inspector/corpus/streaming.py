"""Running mean and spread that never keep the samples (Welford / Chan et al.)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass
class RunningMoments:
    """Mean and variance of a stream of equally shaped samples, in float64.

    Samples arrive in batches; each batch is folded in with the pairwise update
    of Chan, Golub & LeVeque, so memory stays at three arrays of the sample
    shape however many samples pass.

    Formula: for the running ``(n_a, mean_a, M2_a)`` and a batch ``(n_b, mean_b,
    M2_b)``, ``delta = mean_b - mean_a``, ``n = n_a + n_b``,
    ``mean = mean_a + delta n_b / n``, ``M2 = M2_a + M2_b + delta^2 n_a n_b / n``;
    the variance is ``M2 / n`` (population, ``ddof=0``, as ``numpy.std``).

    References
    ----------
    Welford (1962), "Note on a method for calculating corrected sums of squares
    and products", Technometrics 4(3). Chan, Golub & LeVeque (1979), "Updating
    formulae and a pairwise algorithm for computing sample variances".
    """

    shape: tuple[int, ...]
    count: int = 0
    mean: np.ndarray = field(init=False)
    m2: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        self.mean = np.zeros(self.shape)
        self.m2 = np.zeros(self.shape)

    def update(self, samples: np.ndarray) -> None:
        """Fold in a batch ``samples`` of shape ``(k, *shape)``."""
        x = np.asarray(samples, dtype=np.float64)
        if x.shape[1:] != tuple(self.shape):
            raise ValueError(f"samples of shape {x.shape[1:]} do not match {self.shape}")
        n_b = x.shape[0]
        if n_b == 0:
            return
        mean_b = x.mean(0)
        m2_b = ((x - mean_b) ** 2).sum(0)
        n_a = self.count
        n = n_a + n_b
        delta = mean_b - self.mean
        self.mean = self.mean + delta * (n_b / n)
        self.m2 = self.m2 + m2_b + delta**2 * (n_a * n_b / n)
        self.count = n

    @property
    def variance(self) -> np.ndarray:
        return self.m2 / self.count if self.count else np.zeros(self.shape)

    @property
    def std(self) -> np.ndarray:
        return np.sqrt(self.variance)
