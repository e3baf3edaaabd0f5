"""Per-class MCC floors for the CI gate, read from a small CSV file.

The file has two columns, ``class`` and ``floor``, one class per line; a
header row ``class,floor`` is optional. Floors are one-vs-rest MCC values in
[-1, 1].
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

from foldcorr.errors import InvalidInputError

__all__ = ["read_class_floors"]


def read_class_floors(path, classes) -> dict:
    """Read class floors and match them to a tensor's class labels.

    Parameters
    ----------
    path : str or path-like
        CSV file with lines ``class,floor``.
    classes : sequence
        The class labels of the evaluation; file labels are matched to them as
        text, so ``7`` in the file matches the integer class 7.

    Returns
    -------
    dict
        Class label (as in ``classes``) to floor, in file order.

    Raises
    ------
    InvalidInputError
        When the file is missing, empty or not UTF-8 CSV text, a line does not have two cells, a
        floor is not a number in [-1, 1], a class is listed twice, or a class
        is not among ``classes``.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "floors.csv"
    >>> _ = p.write_text("class,floor\\nPodon,0.5\\n7,0.25\\n")
    >>> read_class_floors(p, ["Podon", "Evadne", 7])
    {'Podon': 0.5, 7: 0.25}
    >>> _ = p.write_text("Daphnia,0.5\\n")
    >>> read_class_floors(p, ["Podon", "Evadne"])
    Traceback (most recent call last):
    ...
    foldcorr.errors.InvalidInputError: floors.csv line 1: class 'Daphnia' is not among the evaluation's classes ['Podon', 'Evadne']
    """
    path = Path(path)
    if not path.is_file():
        raise InvalidInputError(f"{path.name}: file not found")
    by_text = {str(c): c for c in classes}
    shown = list(by_text)[:10]
    known = "[" + ", ".join(repr(c) for c in shown) + (", ..." if len(by_text) > 10 else "") + "]"
    floors: dict = {}
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            rows = [(i + 1, row) for i, row in enumerate(csv.reader(fh))
                    if any(c.strip() for c in row)]
    except UnicodeDecodeError as exc:
        bad = exc.object[exc.start:exc.start + 1]
        raise InvalidInputError(
            f"{path.name}: the floors file is not UTF-8 text (byte {bad!r} at offset "
            f"{exc.start}); save it as UTF-8 with lines class,floor") from None
    except csv.Error as exc:
        raise InvalidInputError(f"{path.name}: cannot read the floors file as CSV: {exc}") from None
    if not rows:
        raise InvalidInputError(f"{path.name}: the floors file is empty; expected lines class,floor")
    if [c.strip().lower() for c in rows[0][1]] == ["class", "floor"]:
        rows = rows[1:]
    if not rows:
        raise InvalidInputError(f"{path.name}: the floors file lists no class; expected lines "
                                "class,floor")
    for line, row in rows:
        if len(row) != 2:
            raise InvalidInputError(
                f"{path.name} line {line}: expected two cells class,floor; got {row!r}")
        label, text = row[0].strip(), row[1].strip()
        try:
            floor = float(text)
        except ValueError:
            floor = math.nan
        if not (-1.0 <= floor <= 1.0):
            raise InvalidInputError(
                f"{path.name} line {line}: floor {text!r} for class {label!r} must be a number "
                "from -1 to 1")
        if label not in by_text:
            raise InvalidInputError(
                f"{path.name} line {line}: class {label!r} is not among the evaluation's "
                f"classes {known}")
        key = by_text[label]
        if key in floors:
            raise InvalidInputError(f"{path.name} line {line}: class {label!r} is listed twice")
        floors[key] = floor
    return floors
