"""Print exact pins of the declared minimum versions, read from pyproject.toml.

Every requirement of ``[project] dependencies`` and of the extras named on the command line
becomes ``name==floor``, where the floor is its ``>=`` bound; a requirement without one is an
error, since a minimum that is not declared cannot be tested. A package listed twice is pinned
at its higher floor. CI installs these pins into a second environment and runs the suite there,
so the declared minimums are the versions tested, and they cannot drift apart.

Usage: python .ci/minimums.py [EXTRA ...] > pins.txt
"""
from __future__ import annotations

import re
import sys
import tomllib
from pathlib import Path

PYPROJECT = Path(__file__).resolve().parent.parent / "pyproject.toml"
FLOOR = re.compile(r"^\s*(?P<name>[A-Za-z0-9][A-Za-z0-9._-]*)(?P<extras>\[[^\]]*\])?"
                   r"\s*>=\s*(?P<version>[0-9][^,;\s]*)\s*$")


def version_key(version: str) -> tuple:
    """Numeric parts of a release number, for choosing the higher of two floors."""
    return tuple(int(part) if part.isdigit() else 0 for part in re.split(r"[.+-]", version))


def pins(project: dict, extras: list[str]) -> list[str]:
    """``name[extras]==floor`` for every requirement of the project and the chosen extras."""
    optional = project.get("optional-dependencies", {})
    unknown = [extra for extra in extras if extra not in optional]
    if unknown:
        raise ValueError(f"unknown extra {unknown[0]!r}; pyproject.toml has {sorted(optional)}")
    chosen: dict[str, tuple[str, str]] = {}
    for requirement in [*project.get("dependencies", []),
                        *(r for extra in extras for r in optional[extra])]:
        match = FLOOR.match(requirement)
        if match is None:
            raise ValueError(f"requirement {requirement!r} declares no single `>=` minimum")
        name = match["name"].lower().replace("_", "-")
        extra, version = match["extras"] or "", match["version"]
        if name in chosen:
            old_extra, old_version = chosen[name]
            extra = extra or old_extra
            version = max(version, old_version, key=version_key)
        chosen[name] = (extra, version)
    return [f"{name}{extra}=={version}" for name, (extra, version) in sorted(chosen.items())]


def main(argv: list[str]) -> int:
    """Print the pins, one a line; exit 2 with one line on stderr on a bad declaration."""
    project = tomllib.loads(PYPROJECT.read_text(encoding="utf-8"))["project"]
    try:
        lines = pins(project, argv)
    except ValueError as error:
        print(f"minimums: {error}", file=sys.stderr)
        return 2
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
