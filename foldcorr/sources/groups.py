"""Class groups from a CSV file: one column of classes, one column per level of groups."""

from __future__ import annotations

from typing import TYPE_CHECKING

from pathlib import Path

from foldcorr.errors import InvalidInputError

if TYPE_CHECKING:
    import os

__all__ = ["read_groups"]


def read_groups(path: str | os.PathLike[str]) -> dict[str, dict[str, str]]:
    """Read class groups: ``class,group`` with a header; each further column is one more level.

    Parameters
    ----------
    path : str or path-like
        A CSV file whose first column names classes and whose every other
        column gives each class's group at one level (e.g. species, genus,
        family); the header names the levels.

    Returns
    -------
    dict
        Level name -> (class -> group), levels in column order, all as text.

    Raises
    ------
    InvalidInputError
        On an unreadable file, fewer than two columns, an empty cell or a
        class listed twice.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "g.csv"
    >>> _ = p.write_text("class,genus,family\\ncat,Felis,felid\\nlynx,Lynx,felid\\n")
    >>> read_groups(p)
    {'genus': {'cat': 'Felis', 'lynx': 'Lynx'}, 'family': {'cat': 'felid', 'lynx': 'felid'}}
    """
    import pandas as pd

    name = Path(path).name
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True)
    except (OSError, ValueError, pd.errors.ParserError) as exc:
        raise InvalidInputError(f"cannot read the groups file {name!r}: "
                                f"{str(exc).splitlines()[0]}") from None
    if frame.shape[1] < 2:
        raise InvalidInputError(f"the groups file {name!r} needs a header and at least two "
                                f"columns (class,group); got columns {list(frame.columns)!r}")
    classes = frame.iloc[:, 0].str.strip()
    repeated = classes[classes.duplicated()].tolist()
    if repeated:
        raise InvalidInputError(f"the groups file {name!r} lists class {repeated[0]!r} twice")
    levels = {}
    for column in frame.columns[1:]:
        groups = frame[column].str.strip()
        empty = classes[groups == ""].tolist()
        if empty or (classes == "").any():
            where = f"class {empty[0]!r} has no group" if empty else "a class name is empty"
            raise InvalidInputError(f"the groups file {name!r}: {where} in column {column!r}")
        levels[str(column).strip()] = dict(zip(classes.tolist(), groups.tolist()))
    return levels
