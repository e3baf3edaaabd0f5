"""Writing output files whole or not at all (foldcorr._files)."""

import os

import pytest

from foldcorr._files import atomic_target, write_text
from foldcorr.errors import InvalidInputError


def test_a_folder_target_is_refused_by_name(tmp_path):
    folder = tmp_path / "reports"
    folder.mkdir()
    with pytest.raises(InvalidInputError, match=r"cannot write '.*reports': it is a folder; "
                                                r"give a file path"):
        write_text(folder, "text")
    assert folder.is_dir() and list(folder.iterdir()) == []
    with pytest.raises(InvalidInputError, match="it is a folder"):
        with atomic_target(folder):
            pass
    assert sorted(p.name for p in tmp_path.iterdir()) == ["reports"]  # no temporary left


@pytest.mark.skipif(not os.path.exists(os.devnull), reason="needs a null device")
def test_a_device_is_still_written_directly():
    # The null device is not a regular file: it is written in place, never replaced
    # (common practice for output options).
    write_text(os.devnull, "discarded")
    assert os.path.exists(os.devnull) and not os.path.isfile(os.devnull)


def test_a_file_is_replaced_whole(tmp_path):
    out = tmp_path / "r.txt"
    out.write_text("old")
    write_text(out, "new")
    assert out.read_text() == "new"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.txt"]
