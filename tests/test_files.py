"""Atomic output files: whole or absent, with the user's umask."""

import os
import stat

import pytest

from pvsource.files import atomic_write, write_text


@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_files_take_the_users_umask(tmp_path, umask, mode):
    # POSIX open(2): a new file gets the requested mode 0o666 less the umask's bits.
    old = os.umask(umask)
    try:
        path = write_text(tmp_path / "summary.json", "{}")
    finally:
        os.umask(old)
    assert stat.S_IMODE(path.stat().st_mode) == mode


def test_a_failed_write_leaves_the_old_file_and_no_temporary(tmp_path):
    path = write_text(tmp_path / "hourly.csv", "old")

    def broken(tmp):
        with open(tmp, "w") as f:
            f.write("half")
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        atomic_write(path, broken)
    assert path.read_text() == "old" and sorted(p.name for p in tmp_path.iterdir()) == ["hourly.csv"]
