"""Streaming moments of summary vectors: count, mean, covariance, skewness.

A calibration cell accumulates, for each summary vector of k grid points, the
count n, the mean, the matrix of centred second moments (scatter)
M2 = sum (x - mean)(x - mean)^T and the per-coordinate third central moments
M3 = sum (x - mean)^3.  Batches are reduced exactly (two passes over the
batch) and combined with the pairwise update formulas of Chan, Golub &
LeVeque (1983) for M2 and Pébay (2008, Sandia report SAND2008-6212, eq. 1.5)
for M3; for batches A and B with delta = mean_B - mean_A and n = n_A + n_B:

    mean = mean_A + delta n_B / n
    M2   = M2_A + M2_B + delta delta^T n_A n_B / n
    M3   = M3_A + M3_B + delta^3 n_A n_B (n_A - n_B) / n^2
           + 3 delta (n_A M2_B - n_B M2_A) / n          (diagonal of M2)

so a cell can be extended later with more replicates without recomputing the
old ones.  Merging in a fixed order (chunk index order) makes the result
bit-identical however the chunks were scheduled.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Moments"]


@dataclass
class Moments:
    """Count, mean, scatter matrix and third central moments of k-vectors."""

    count: int
    mean: np.ndarray
    m2: np.ndarray
    m3: np.ndarray

    @classmethod
    def empty(cls, k: int) -> "Moments":
        """No observations of k-vectors."""
        return cls(0, np.zeros(k), np.zeros((k, k)), np.zeros(k))

    @classmethod
    def of(cls, x) -> "Moments":
        """Exact moments of a batch: rows of ``x`` (shape (r, k), or (r,) for
        scalars) are the observations."""
        x = np.asarray(x, dtype=float)
        if x.ndim == 1:
            x = x[:, None]
        if x.ndim != 2:
            raise ValueError("a batch must be a 1D or 2D array")
        if not np.all(np.isfinite(x)):
            raise ValueError("observations must be finite")
        r, k = x.shape
        if r == 0:
            return cls.empty(k)
        mean = x.mean(axis=0)
        c = x - mean
        return cls(r, mean, c.T @ c, np.sum(c ** 3, axis=0))

    @property
    def k(self) -> int:
        return len(self.mean)

    def merge(self, other: "Moments") -> "Moments":
        """Moments of the union of both sets of observations (a new object)."""
        if other.k != self.k:
            raise ValueError(f"cannot merge moments of length {self.k} and {other.k}")
        na, nb = self.count, other.count
        if nb == 0:
            return Moments(na, self.mean.copy(), self.m2.copy(), self.m3.copy())
        if na == 0:
            return Moments(nb, other.mean.copy(), other.m2.copy(), other.m3.copy())
        n = na + nb
        d = other.mean - self.mean
        mean = self.mean + d * (nb / n)
        m2 = self.m2 + other.m2 + np.outer(d, d) * (na * nb / n)
        va, vb = np.diag(self.m2), np.diag(other.m2)
        m3 = (self.m3 + other.m3 + d ** 3 * (na * nb * (na - nb) / n ** 2)
              + 3.0 * d * (na * vb - nb * va) / n)
        return Moments(n, mean, m2, m3)

    def update(self, x) -> "Moments":
        """Moments after adding the batch ``x`` (a new object)."""
        return self.merge(Moments.of(x))

    @property
    def cov(self) -> np.ndarray:
        """Sample covariance (divisor n - 1); NaN with fewer than 2 observations."""
        if self.count < 2:
            return np.full((self.k, self.k), np.nan)
        return self.m2 / (self.count - 1)

    @property
    def sd(self) -> np.ndarray:
        return np.sqrt(np.diag(self.cov))

    @property
    def sem(self) -> np.ndarray:
        """Standard error of the mean, sd / sqrt(n)."""
        return self.sd / np.sqrt(self.count) if self.count else np.full(self.k, np.nan)

    @property
    def skewness(self) -> np.ndarray:
        """Per-coordinate sample skewness g1 = sqrt(n) M3 / M2^(3/2) (the
        moment estimator; 0 where the variance is 0)."""
        v = np.diag(self.m2)
        with np.errstate(divide="ignore", invalid="ignore"):
            g = np.sqrt(self.count) * self.m3 / v ** 1.5
        return np.where(v > 0, g, 0.0)

    def as_arrays(self) -> dict:
        """Plain arrays for storage (HDF5 datasets)."""
        return {"count": np.int64(self.count), "mean": self.mean, "m2": self.m2, "m3": self.m3}

    @classmethod
    def from_arrays(cls, d) -> "Moments":
        """Inverse of :meth:`as_arrays`; checks the shapes."""
        mean = np.asarray(d["mean"], dtype=float)
        m2 = np.asarray(d["m2"], dtype=float)
        m3 = np.asarray(d["m3"], dtype=float)
        k = mean.shape[0] if mean.ndim == 1 else -1
        if k < 0 or m2.shape != (k, k) or m3.shape != (k,) or int(d["count"]) < 0:
            raise ValueError("inconsistent stored moments")
        return cls(int(d["count"]), mean, m2, m3)
