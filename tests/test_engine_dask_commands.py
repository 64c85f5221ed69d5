"""``merge`` and ``report`` with ``--engine dask`` give the in-process engine's output, on a real
local cluster.

A real ``distributed.LocalCluster`` with 2 worker processes on 127.0.0.1 (one per test module)
settles the cells of the engine tests' generated dataset (tests/engine_data.py: the demo codebook,
every level of measurement, a multi-select and a conditional variable, missing codes, invalid
cells), partitioned by unit and one file per coder, with decisions of an adjudication list made
by ``coderel adjudicate`` on the same data. The oracle is the in-process engine on the same files
(itself checked against hand-worked rules in tests/test_merge.py and published values in
tests/test_agree_published.py): the dataset files are the same bytes in csv, xlsx and parquet,
the audit lines the same but for their time and output path, and the report's numbers equal.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from coderel.cli import app
from tests.engine_data import CODEBOOK, compare, engine_dataset, local_cluster

distributed = pytest.importorskip("distributed")

pytestmark = pytest.mark.cluster
_cluster = pytest.fixture(scope="module", name="cluster")(local_cluster)
_dataset = pytest.fixture(scope="module", name="dataset")(engine_dataset)


def _invoke(*args) -> object:
    return CliRunner().invoke(app, [str(a) for a in args])


@pytest.fixture(scope="module")
def decided(dataset, tmp_path_factory) -> Path:
    """The adjudication list of the whole dataset with a third of its rows decided (the first
    coder's value that is a value), by an adjudicator and some with a note."""
    folder = tmp_path_factory.mktemp("decisions")
    listed = folder / "list.csv"
    res = _invoke("adjudicate", "-c", CODEBOOK, dataset["unit"], "-o", listed)
    assert res.exit_code in (0, 1), res.output
    with open(listed, encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(fh))
    coders = ("ana", "ben", "cai", "dev")
    for i, row in enumerate(rows):
        given = [row[c] for c in coders if row[c] not in ("", "(blank)")]
        if i % 3 or not given or row["variable"] == "actions":
            continue
        row["decision"] = given[0]
        row["adjudicator"] = "zoe"
        row["note"] = "checked against the photo log" if i % 2 else ""
    out = folder / "decided.csv"
    with open(out, "w", encoding="utf-8", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)
    assert sum(bool(r["decision"]) for r in rows) > 500
    return out


def _without(record: dict, *keys: str) -> dict:
    return {k: v for k, v in record.items() if k not in keys}


@pytest.mark.parametrize(
    ("layout", "form", "extra"),
    [
        ("unit", "csv", ["--rule", "majority", "--tolerance", "visitor_distance_m=5"]),
        ("unit", "xlsx", ["--spread"]),
        ("coder", "parquet", []),
        ("variable", "csv", None),  # no decisions: each partition settled as soon as it is read
    ],
)
def test_merge_writes_the_in_process_dataset(
    cluster, dataset, decided, tmp_path, layout, form, extra
):
    paths = {}
    payloads = {}
    for engine in ("local", "dask"):
        out = tmp_path / engine / f"merged.{form}"
        out.parent.mkdir()
        args = ["merge", "-c", CODEBOOK, dataset[layout], "-o", out, "--json"]
        args += ["--decisions", decided, *extra] if extra is not None else []
        if engine == "dask":
            args += ["--engine", "dask", "--scheduler", cluster.scheduler_address]
        res = _invoke(*args)
        assert res.exit_code == 0, res.output
        paths[engine] = out
        payloads[engine] = json.loads(res.stdout)
    assert paths["local"].read_bytes() == paths["dask"].read_bytes()
    local, remote = payloads["local"], payloads["dask"]
    assert _without(local, "output", "audit_log") == _without(remote, "output", "audit_log")
    assert local["totals"]["unresolved"] > 0
    logs = [json.loads((p.parent / f"{p.name}.audit.jsonl").read_text()) for p in paths.values()]
    assert logs[0]["output"]["sha256"] == logs[1]["output"]["sha256"]
    assert _without(logs[0], "time", "output") == _without(logs[1], "time", "output")
    if extra is not None:
        assert len(local["adjudicated"]) > 300
        assert any(a["note"] for a in logs[1]["adjudicated"])  # notes kept on the client


def test_merge_on_the_cluster_answers_every_decision_as_in_process(cluster, dataset, decided):
    """Decisions for units no partition holds (a part left out), for a variable the codebook
    lacks, and stale ones: the same problems in the same order."""
    import dataclasses

    import pandas as pd

    from coderel.adjudicate import read_decisions
    from coderel.codebook.load import load_codebook
    from coderel.engine.merge import merge_on_cluster
    from coderel.io.read import read_codings
    from coderel.merge import merge

    parts = sorted(Path(dataset["unit"]).glob("*.parquet"))[1:]  # a fifth of the units gone
    with open(decided, encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(fh))
    unknown = dict(rows[0], variable="not_in_codebook", decision="1", key="x|not_in_codebook")
    odd = decided.with_name("odd.csv")
    with open(odd, "w", encoding="utf-8", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows([*rows[:40], unknown, *rows[40:]])
    cb = load_codebook(CODEBOOK)
    codings = read_codings(cb, parts)
    local = merge(codings, read_decisions(odd, cb, codings.coders), rule="majority")
    with distributed.Client(cluster) as client:
        run = merge_on_cluster(client, cb, parts, decisions_path=odd, rule="majority")
    result = run.result
    pd.testing.assert_frame_equal(local.frame, result.frame)
    assert local.to_dict() == result.to_dict()
    assert [dataclasses.asdict(p) for p in local.problems] == [
        dataclasses.asdict(p) for p in result.problems
    ]
    assert local.sources == result.sources
    assert len(result.sources) == 4
    reasons = {s["reason"] for s in result.stale}
    assert "the unit is not in the data any more" in reasons
    assert any(p.code == "bad-decision" for p in result.problems)
    assert run.labels == len(codings.frame)


def test_report_numbers_equal_the_in_process_report(cluster, dataset, decided, tmp_path):
    base = ["report", "-c", CODEBOOK, dataset["coder"], "--decisions", decided]
    base += ["--replicates", "200", "--date", "2026-12-03", "--json"]
    (tmp_path / "local").mkdir()
    (tmp_path / "dask").mkdir()
    local = _invoke(*base, "-o", tmp_path / "local" / "report.md")
    address = cluster.scheduler_address
    remote = _invoke(
        *base, "-o", tmp_path / "dask" / "report.md", "--engine", "dask", "--scheduler", address
    )
    assert local.exit_code == remote.exit_code == 0, remote.output
    worst = compare(json.loads(local.stdout), json.loads(remote.stdout))
    assert worst <= 1e-12
    texts = [(tmp_path / e / "report.md").read_text(encoding="utf-8") for e in ("local", "dask")]
    assert texts[0] == texts[1]
    assert "partition(s) by unit on the workers" in remote.stderr


def test_report_refuses_occasions_with_the_dask_engine(dataset):
    res = _invoke(
        "report",
        "-c",
        CODEBOOK,
        dataset["unit"],
        "--json",
        "--engine",
        "dask",
        "--occasion",
        "ana=ana2",
    )
    assert res.exit_code == 2
    assert "--occasion" in res.stderr


@pytest.mark.parametrize("command", ["merge", "report"])
def test_merge_and_report_refuse_a_scheduler_without_the_dask_engine(dataset, tmp_path, command):
    out = tmp_path / ("merged.csv" if command == "merge" else "report.md")
    res = _invoke(
        command, "-c", CODEBOOK, dataset["unit"], "-o", out, "--scheduler", "tcp://127.0.0.1:1"
    )
    assert res.exit_code == 2
    assert "--scheduler goes with --engine dask" in res.stderr
    assert not out.exists()


def test_merge_with_the_dask_engine_reads_parquet_only(tmp_path):
    (tmp_path / "d").mkdir()
    (tmp_path / "d" / "ana.csv").write_text("unit,coder,variable,value\nr1,ana,species,1\n")
    out = tmp_path / "merged.csv"
    res = _invoke("merge", "-c", CODEBOOK, tmp_path / "d", "-o", out, "--engine", "dask")
    assert res.exit_code == 2
    assert "long Parquet tables" in res.stderr
    assert not out.exists()
