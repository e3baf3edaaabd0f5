"""Figures of a score sweep: MCC and its companions against the threshold.

Needs the optional extra ``plot`` (matplotlib). Figures are drawn on the Agg
canvas without pyplot, so no display is needed and no global state changes.
One PNG per label; the in-sample best threshold, the user's threshold and the
thresholds chosen on the other folds are marked.
"""

from __future__ import annotations

import re
from pathlib import Path

from foldcorr.analysis.thresholds import THRESHOLD, SweepResult

__all__ = ["plot_sweep", "MAX_POINTS"]

#: Thresholds drawn per curve at most (evenly spaced, plus the best).
MAX_POINTS = 4000

#: (figure, legend, line style, width, colour): styles differ too, so colour is not needed.
COMPANIONS = (("mcc", "MCC", "-", 2.4, "#1f4e9c"), ("f1", "F1", "--", 1.3, "#e08214"),
              ("recall", "recall", ":", 1.5, "#2ca25f"),
              ("precision", "precision", "-.", 1.3, "#8c6bb1"),
              ("accuracy", "accuracy", (0, (1, 3)), 1.3, "#7f7f7f"))


def _file_name(label, i: int) -> str:
    if label is None:
        return "sweep.png"
    safe = re.sub(r"[^A-Za-z0-9._-]+", "_", str(label)).strip("._") or f"label{i}"
    return f"sweep_{i:03d}_{safe}.png"


def plot_sweep(result: SweepResult, folder) -> list[Path]:
    """Draw one PNG per label into ``folder`` (created if missing); return the paths.

    Raises
    ------
    MissingDependencyError
        When matplotlib is not installed (extra ``plot``).
    InvalidInputError
        When ``folder`` cannot be created.

    Examples
    --------
    >>> import tempfile
    >>> from foldcorr.analysis.thresholds import sweep
    >>> r = sweep([0, 1, 1, 0, 1, 0], [0.1, 0.8, 0.6, 0.3, 0.4, 0.5], folds=[1, 1, 1, 2, 2, 2])
    >>> paths = plot_sweep(r, tempfile.mkdtemp())  # doctest: +SKIP
    >>> [p.name for p in paths]  # doctest: +SKIP
    ['sweep.png']
    """
    from foldcorr._files import atomic_target
    from foldcorr.errors import InvalidInputError, require
    from foldcorr.report.tables import plot_text

    why = "--plot (sweep figures)"
    require("matplotlib", extra="plot", purpose=why)
    figure = require("matplotlib.figure", extra="plot", purpose=why)
    agg = require("matplotlib.backends.backend_agg", extra="plot", purpose=why)
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InvalidInputError(f"cannot create the plot folder {str(folder)!r}: "
                                f"{exc.strerror}") from None
    paths = []
    for i, s in enumerate(result.labels):
        curve = s.figures(max_points=MAX_POINTS)
        x = curve[THRESHOLD].values
        fig = figure.Figure(figsize=(10, 4.8), dpi=110)
        agg.FigureCanvasAgg(fig)
        ax = fig.add_subplot()
        for key, title, style, width, colour in COMPANIONS:
            ax.plot(x, curve[key].values, linestyle=style, linewidth=width, label=title,
                    color=colour, drawstyle="steps-pre")  # a threshold in (a, b] acts as b
        ax.axvline(s.best_threshold, color="black", linewidth=1.0,
                   label=f"best in-sample {s.best_threshold:.3g} (MCC {s.best_mcc:.3f})")
        if s.at_threshold is not None:
            ax.axvline(s.at_threshold, color="grey", linestyle="--", linewidth=1.0,
                       label=f"your threshold {s.at_threshold:g} (MCC {s.mcc_at:.3f})")
        if s.crossfold is not None:
            for j, theta in enumerate(s.crossfold["threshold"].values):
                ax.axvline(theta, color="#c0392b", alpha=0.6, linewidth=0.9, linestyle=(0, (4, 2)),
                           label=(f"chosen on other folds (held-out MCC {s.crossfold_mcc:.3f})"
                                  if j == 0 else None))
        ax.set_xlabel("threshold (predict positive when score >= threshold)")
        ax.set_ylabel("value")
        ax.set_ylim(min(-0.05, float(curve["mcc"].min()) - 0.05), 1.05)
        title = "binary sweep" if s.label is None else f"label {plot_text(s.label)}"
        ax.set_title(f"{title}: {s.n_thresholds} distinct thresholds")
        ax.grid(alpha=0.3)
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
        fig.tight_layout()
        target = folder / _file_name(s.label, i)
        with atomic_target(target, suffix=".png") as tmp:
            fig.savefig(tmp, format="png")
        paths.append(target)
    return paths
