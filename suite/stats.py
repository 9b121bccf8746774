"""Are the differences real? Confidence intervals and rank tests for result tables.

* :func:`bootstrap_ci` — percentile/BCa bootstrap confidence interval of a
  statistic over seeds (and start states), via :func:`scipy.stats.bootstrap`.
* :func:`friedman_nemenyi` — the Friedman test over systems (blocks) and
  learners (treatments), followed by the Nemenyi post-hoc critical difference
  (Demšar 2006), with the groups of learners whose average ranks are not
  significantly different.

References
----------
J. Demšar, "Statistical comparisons of classifiers over multiple data sets",
J. Mach. Learn. Res. 7, 1–30 (2006).
B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall (1993).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

__all__ = ["bootstrap_ci", "nemenyi_critical_difference", "friedman_nemenyi", "RankTest"]


def bootstrap_ci(values, statistic=np.median, *, confidence=0.95, n_resamples=2000, seed=0):
    """Bootstrap confidence interval of ``statistic`` over ``values``.

    Returns ``(low, high)``; ``(nan, nan)`` with fewer than two finite values
    (an interval from one seed would pretend a certainty it does not have).
    """
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    if x.size < 2:
        return (float("nan"), float("nan"))
    if np.all(x == x[0]):
        return (float(x[0]), float(x[0]))
    res = stats.bootstrap((x,), statistic, confidence_level=confidence, n_resamples=n_resamples,
                          method="percentile", rng=np.random.default_rng(seed),
                          vectorized=statistic in (np.median, np.mean))  # these take axis=: one call, not 2000
    return (float(res.confidence_interval.low), float(res.confidence_interval.high))


def nemenyi_critical_difference(k: int, n_blocks: int, alpha: float = 0.05) -> float:
    """Critical difference of average ranks for ``k`` treatments over ``n_blocks`` blocks.

    ``CD = q_alpha * sqrt(k (k + 1) / (6 N))`` with ``q_alpha`` the upper
    ``alpha`` quantile of the studentized range for ``k`` groups and infinite
    degrees of freedom, divided by sqrt(2) (Demšar 2006, section 3.2.2).
    """
    if k < 2 or n_blocks < 1:
        return float("nan")
    q = stats.studentized_range.ppf(1.0 - alpha, k, np.inf) / np.sqrt(2.0)
    return float(q * np.sqrt(k * (k + 1) / (6.0 * n_blocks)))


@dataclass(frozen=True)
class RankTest:
    """Outcome of :func:`friedman_nemenyi`."""

    learners: tuple[str, ...]
    average_ranks: tuple[float, ...]  # 1 = best
    n_blocks: int
    statistic: float
    p_value: float
    critical_difference: float
    alpha: float
    cliques: tuple[tuple[str, ...], ...]  # maximal groups not significantly different

    def significant(self) -> bool:
        return bool(np.isfinite(self.p_value) and self.p_value < self.alpha)

    def summary(self) -> str:
        """The result in words, for a report."""
        order = np.argsort(self.average_ranks)
        ranked = ", ".join(f"{self.learners[i]} ({self.average_ranks[i]:.2f})" for i in order)
        if self.n_blocks < 2 or len(self.learners) < 2:
            return f"Too few systems ({self.n_blocks}) or learners to test whether rankings differ. Ranks: {ranked}."
        head = (f"Average ranks over {self.n_blocks} blocks (1 = best): {ranked}. "
                f"Friedman test: statistic {self.statistic:.3g}, p = {self.p_value:.3g}")
        if not self.significant():
            return head + (f" — at alpha = {self.alpha} the learners' rankings are NOT significantly different; "
                           "do not read the order as a ranking.")
        parts = [head + f"; Nemenyi critical difference {self.critical_difference:.2f}."]
        groups = [g for g in self.cliques if len(g) > 1]
        if groups:
            parts.append("Not significantly different from each other: "
                         + "; ".join("{" + ", ".join(g) + "}" for g in groups) + ".")
        else:
            parts.append("Every pair of learners differs significantly.")
        return " ".join(parts)


def friedman_nemenyi(scores, learners, *, higher_is_better=True, alpha=0.05) -> RankTest:
    """Rank ``learners`` over blocks (rows of ``scores``, e.g. systems × tasks).

    ``scores`` has shape (n_blocks, k); NaN entries (a failed or inapplicable
    learner) rank last within their block. Ties share the average rank.
    """
    s = np.asarray(scores, dtype=float)
    if s.ndim != 2 or s.shape[1] != len(learners):
        raise ValueError(f"scores must have shape (n_blocks, {len(learners)}), got {s.shape}")
    n, k = s.shape
    key = s if not higher_is_better else -s
    key = np.where(np.isfinite(key), key, np.inf)
    ranks = np.vstack([stats.rankdata(row) for row in key]) if n else np.zeros((0, k))
    avg = ranks.mean(axis=0) if n else np.full(k, np.nan)
    if n >= 2 and k >= 3:
        res = stats.friedmanchisquare(*[ranks[:, j] for j in range(k)])
        stat, p = float(res.statistic), float(res.pvalue)
    elif n >= 2 and k == 2:
        # two treatments: the Friedman test reduces to a sign test (Demšar 2006, section 3.1.3)
        diff = ranks[:, 0] - ranks[:, 1]
        wins, losses = int(np.sum(diff < 0)), int(np.sum(diff > 0))
        stat = float(wins)
        p = float(stats.binomtest(wins, wins + losses).pvalue) if wins + losses else 1.0
    else:
        stat, p = float("nan"), float("nan")
    cd = nemenyi_critical_difference(k, n, alpha)
    order = list(np.argsort(avg))
    cliques: list[tuple[str, ...]] = []
    for a in range(k):
        members = [order[b] for b in range(a, k) if avg[order[b]] - avg[order[a]] <= cd + 1e-12]
        group = tuple(learners[i] for i in members)
        if not any(set(group) <= set(c) for c in cliques):
            cliques.append(group)
    return RankTest(tuple(learners), tuple(float(x) for x in avg), n, stat, p, cd, alpha, tuple(cliques))
