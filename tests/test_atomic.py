"""Atomic writes: a failure mid-write leaves the old file intact."""

import pytest

from coderel.errors import UsageError
from coderel.io.atomic import atomic_path, refuse_overwriting_inputs, write_text


def test_failed_write_keeps_old_file(tmp_path):
    target = tmp_path / "out.csv"
    write_text(target, "old\n")
    with pytest.raises(RuntimeError), atomic_path(target) as tmp:
        tmp.write_text("half")
        raise RuntimeError("crash")
    assert target.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["out.csv"]


def test_output_equal_to_input_is_refused(tmp_path):
    f = tmp_path / "a.csv"
    f.write_text("x")
    with pytest.raises(UsageError):
        refuse_overwriting_inputs([tmp_path / "." / "a.csv"], [f])


def test_new_outputs_get_the_usual_mode_and_old_ones_keep_theirs(tmp_path):
    # mkstemp creates 0o600 files; an output meant to be shared gets 0o666 less the umask, as
    # open(..., "w") would give, and an existing output keeps its own mode.
    import os
    import stat

    from coderel.io.atomic import write_text

    mask = os.umask(0o022)
    try:
        new = tmp_path / "new.txt"
        write_text(new, "a")
        assert stat.S_IMODE(new.stat().st_mode) == 0o644
        old = tmp_path / "old.txt"
        old.write_text("x")
        old.chmod(0o640)
        write_text(old, "b")
        assert stat.S_IMODE(old.stat().st_mode) == 0o640
    finally:
        os.umask(mask)
