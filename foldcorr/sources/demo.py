"""An invented demo: a plankton-imaging classifier evaluated over five folds.

The scenario is made up for demonstration only. An imaging flow cytometer
photographs plankton; a classifier assigns each image to one of 36 taxa. Taxa
frequencies are long-tailed, a few look-alike taxa are systematically confused
(copepod genera, two cladocerans, detritus and marine snow), and rare taxa are
recognised less reliably. Everything is drawn from one seeded generator, so the
demo is the same on every machine.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from foldcorr.errors import InvalidInputError

__all__ = ["TAXA", "make_demo", "write_demo", "DEMO_FILE", "DEMO_SAMPLES", "DEMO_SEED"]

DEMO_FILE = "plankton_predictions.csv"
#: Size and seed of the bundled demo.
DEMO_SAMPLES, DEMO_SEED = 24_000, 20261201

#: Taxa with the look-alike group each belongs to.
TAXA = {
    "detritus": "particle", "marine snow": "particle", "fibre": "particle", "bubble": "particle",
    "Chaetoceros": "diatom", "Thalassiosira": "diatom", "Skeletonema": "diatom",
    "Coscinodiscus": "diatom", "Rhizosolenia": "diatom", "Pseudo-nitzschia": "diatom",
    "Ditylum": "diatom", "Guinardia": "diatom",
    "Calanus": "copepod", "Pseudocalanus": "copepod", "Oithona": "copepod",
    "Acartia": "copepod", "Centropages": "copepod", "Temora": "copepod", "Metridia": "copepod",
    "Ceratium": "dinoflagellate", "Protoperidinium": "dinoflagellate",
    "Dinophysis": "dinoflagellate", "Noctiluca": "dinoflagellate",
    "Prorocentrum": "dinoflagellate",
    "Evadne": "cladoceran", "Podon": "cladoceran",
    "appendicularian": "gelatinous", "chaetognath": "gelatinous",
    "euphausiid larva": "larva", "polychaete larva": "larva", "echinoderm larva": "larva",
    "fish larva": "larva", "fish egg": "egg", "pteropod": "shelled",
    "ostracod": "shelled", "foraminiferan": "shelled",
}

#: (actual, taken for, share of the actual taxon's images) look-alike pairs.
SYSTEMATIC = (
    ("Pseudocalanus", "Calanus", 0.30),
    ("Podon", "Evadne", 0.35),
    ("marine snow", "detritus", 0.25),
    ("Skeletonema", "Chaetoceros", 0.20),
    ("fish egg", "bubble", 0.30),
)


def make_demo(n: int = DEMO_SAMPLES, *, seed: int = DEMO_SEED, folds: int = 5) -> pd.DataFrame:
    """Generate the demo prediction table.

    Parameters
    ----------
    n : int, default 24000
        Number of images.
    seed : int
        Seed of the generator; the default gives the bundled demo.
    folds : int, default 5
        Number of cross-validation folds (assigned round-robin after shuffling).

    Returns
    -------
    pandas.DataFrame
        Columns ``image_id``, ``actual``, ``predicted`` and ``fold``.

    Examples
    --------
    >>> df = make_demo(500, seed=1)
    >>> list(df.columns), len(df), df["fold"].nunique()
    (['image_id', 'actual', 'predicted', 'fold'], 500, 5)
    """
    rng = np.random.default_rng(seed)
    names = np.array(list(TAXA))
    groups = np.array(list(TAXA.values()))
    k = len(names)
    prevalence = 1.0 / np.arange(1, k + 1) ** 1.15
    prevalence /= prevalence.sum()
    actual = rng.choice(k, size=n, p=prevalence)
    # Rarer taxa are recognised less reliably: 0.95 for the commonest down to ~0.6.
    skill = 0.95 - 0.35 * np.linspace(0, 1, k) ** 0.7
    predicted = actual.copy()
    wrong = rng.random(n) > skill[actual]
    predicted[wrong] = _confuse(rng, actual[wrong], groups, prevalence)
    index = {name: i for i, name in enumerate(names)}
    for source, target, share in SYSTEMATIC:
        hit = (actual == index[source]) & (rng.random(n) < share)
        predicted[hit] = index[target]
    fold = rng.permutation(n) % folds + 1
    return pd.DataFrame({
        "image_id": [f"img{i:06d}" for i in range(n)],
        "actual": names[actual],
        "predicted": names[predicted],
        "fold": fold,
    })


def _confuse(rng, actual: np.ndarray, groups: np.ndarray, prevalence: np.ndarray):
    """A wrong taxon for each sample: mostly a look-alike, else any common taxon."""
    out = np.empty_like(actual)
    k = len(groups)
    for i, a in enumerate(actual):
        same = np.flatnonzero((groups == groups[a]) & (np.arange(k) != a))
        if same.size and rng.random() < 0.7:
            out[i] = rng.choice(same)
        else:
            p = prevalence.copy()
            p[a] = 0
            out[i] = rng.choice(k, p=p / p.sum())
    return out


def write_demo(folder, *, n: int = DEMO_SAMPLES, seed: int = DEMO_SEED) -> Path:
    """Write the demo table as CSV into ``folder`` (created if needed).

    Returns
    -------
    pathlib.Path
        The path of the CSV file.

    Raises
    ------
    InvalidInputError
        When ``folder`` exists and is not a folder, or cannot be created.

    Examples
    --------
    >>> import tempfile
    >>> write_demo(tempfile.mkdtemp(), n=100).name
    'plankton_predictions.csv'
    """
    from foldcorr._files import write_text

    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise InvalidInputError(
            f"the demo folder (`folder`, --out) {str(folder)!r} is an existing file; give a "
            "folder, existing or new")
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InvalidInputError(
            f"cannot create the demo folder (`folder`, --out) {str(folder)!r}: "
            f"{exc.strerror}") from None
    path = folder / DEMO_FILE
    write_text(path, make_demo(n, seed=seed).to_csv(index=False))
    return path
