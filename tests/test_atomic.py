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
