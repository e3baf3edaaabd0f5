"""Coverage of the bootstrap intervals on simulated data (slow; run with ``-m slow``).

Datasets are drawn from a known confusion-probability matrix P. R_K depends on
the cell proportions only (it is unchanged when every count is scaled), so the
population value is R_K of P itself (Gorodkin 2004's definition as the
correlation of one-hot truth and prediction under the joint distribution). A 95%
interval should cover it in about 95% of datasets; with 1000 datasets the
binomial standard error of the rate is 0.007, and the check allows 93-97%.

``python tests/test_coverage.py`` prints the rates without pytest.
"""

from __future__ import annotations

import numpy as np
import pytest

from foldcorr.metrics import rk
from foldcorr.tensor import confusion_tensor
from foldcorr.analysis.uncertainty import bootstrap

P = np.array([[0.22, 0.05, 0.03, 0.01],
              [0.04, 0.16, 0.05, 0.01],
              [0.02, 0.04, 0.20, 0.02],
              [0.01, 0.01, 0.02, 0.11]])
P = P / P.sum()


def simulate(method: str, *, datasets: int = 1000, n: int = 400, folds: int = 1,
             resamples: int = 1000, seed: int = 0) -> float:
    """Share of datasets whose interval covers the population R_K."""
    truth = float(rk(confusion_tensor(P, list("abcd"))))
    rng = np.random.default_rng(seed)
    counts = rng.multinomial(n // folds, P.ravel(), size=(datasets, folds)).reshape(
        datasets, folds, 4, 4)
    t = confusion_tensor(counts, list("abcd"),
                         leading={"dataset": np.arange(datasets), "fold": np.arange(folds)})
    res = bootstrap(t, n_resamples=resamples, method=method, seed=seed + 1)
    covered = (res.low <= truth) & (truth <= res.high)
    return float(covered.mean())


@pytest.mark.slow
@pytest.mark.parametrize("method, folds", [("percentile", 1), ("bca", 1), ("percentile", 5)])
def test_95_percent_intervals_cover_the_population_value(method, folds):
    rate = simulate(method, folds=folds)
    print(f"coverage of 95% {method} intervals ({folds} fold(s), N=400, 1000 datasets): {rate:.3f}")
    assert 0.93 <= rate <= 0.97


if __name__ == "__main__":
    for method, folds in (("percentile", 1), ("bca", 1), ("percentile", 5)):
        print(f"coverage of 95% {method} intervals ({folds} fold(s), N=400, 1000 datasets): "
              f"{simulate(method, folds=folds):.3f}")
