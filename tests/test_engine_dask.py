"""The dask engine gives the in-process engine's numbers, on a real local cluster.

A real ``distributed.LocalCluster`` with 2 worker processes on 127.0.0.1 computes ``agree`` on a
generated dataset (the demo codebook: every level of measurement, a multi-select variable, skip
logic, missing codes, a few invalid cells) written as Parquet parts, partitioned by unit, one file
per coder and one per variable (every unit in several parts: the rows are repartitioned by a
hash of the unit ID on the workers); the oracle is the in-process engine on the same files,
itself checked against published values elsewhere (tests/test_agree_published.py). Estimates,
intervals, standard errors and every other number agree to 1e-12 (the sums of the workers' runs
are added in another order than one process adds its blocks: rounding only), everything else is
equal. The ~1M-label case is in benchmarks/bench_scale.py (``--engine dask``).
"""

from __future__ import annotations

import json
import sys

import pytest
from typer.testing import CliRunner

from coderel.cli import app
from coderel.codebook.load import load_codebook
from tests.engine_data import (
    CODEBOOK,
    compare,
    engine_dataset,
    local_cluster,
    long_table,
    write_dataset,
)

distributed = pytest.importorskip("distributed")

pytestmark = pytest.mark.cluster
_cluster = pytest.fixture(scope="module", name="cluster")(local_cluster)
_dataset = pytest.fixture(scope="module", name="dataset")(engine_dataset)


def _client_plans(monkeypatch) -> list[int]:
    """The number of units of every plan built in this process (the client) from now on."""
    import coderel.stats.plan as plan_module

    built: list[int] = []
    real = plan_module.build_plan

    def spy(x, *args, **kwargs):
        built.append(x.shape[0])
        return real(x, *args, **kwargs)

    monkeypatch.setattr(plan_module, "build_plan", spy)
    return built


@pytest.mark.parametrize("layout", ["unit", "coder", "variable"])
def test_dask_engine_gives_the_in_process_numbers(cluster, dataset, layout, monkeypatch):
    from coderel.agree import agreement
    from coderel.engine.agree import agreement_on_cluster
    from coderel.io.read import read_codings

    cb = load_codebook(CODEBOOK)
    folder = dataset[layout]
    codings = read_codings(cb, [folder])
    local = agreement(codings, replicates=400, seed=5, icc_ordinal=True, memory=2**20)
    built = _client_plans(monkeypatch)
    with distributed.Client(cluster) as client:
        run = agreement_on_cluster(
            client, cb, [folder], replicates=400, seed=5, icc_ordinal=True, memory=2**20
        )
    # the plans over units are built on the workers; the client builds only their formulas
    assert len(built) == len(run.result.variables)
    assert max(built) == 0
    assert run.labels == len(codings.frame) > 30_000
    # by unit: one partition per file; else the rows repartitioned by a hash of the unit ID
    assert run.partitions == {"unit": 5, "coder": 4, "variable": 10}[layout]
    assert len(run.problems.errors) == len(codings.problems.errors) > 0
    assert run.single_coded_units == codings.single_coded_units()
    worst = compare(local.to_dict(pairs=True), run.result.to_dict(pairs=True))
    assert worst <= 1e-12
    # the intervals are there to compare: most coefficients have one
    alpha = [v.coefficients["krippendorff_alpha"] for v in run.result.variables]
    assert sum(a is not None and a.ci is not None for a in alpha) >= 10


@pytest.mark.parametrize(("method", "replicates"), [("percentile", 300), ("bca", 0)])
def test_percentile_intervals_and_no_replicates_match_too(cluster, dataset, method, replicates):
    from coderel.agree import agreement
    from coderel.engine.agree import agreement_on_cluster
    from coderel.io.read import read_codings

    cb = load_codebook(CODEBOOK)
    folder = dataset["unit"]
    settings = {"replicates": replicates, "seed": 9, "interval_method": method}
    local = agreement(read_codings(cb, [folder]), **settings)
    with distributed.Client(cluster) as client:
        run = agreement_on_cluster(client, cb, [folder], **settings)
    compare(local.to_dict(pairs=True), run.result.to_dict(pairs=True))
    alpha = [v.coefficients["krippendorff_alpha"] for v in run.result.variables]
    with_ci = sum(a is not None and a.ci is not None for a in alpha)
    assert with_ci >= 10 if replicates else with_ci == 0


def test_agree_command_on_a_scheduler_matches_the_default_engine(cluster, dataset):
    runner = CliRunner()
    base = ["agree", "-c", str(CODEBOOK), str(dataset["unit"]), "--replicates", "200", "--json"]
    local = runner.invoke(app, base)
    remote = runner.invoke(
        app, [*base, "--engine", "dask", "--scheduler", cluster.scheduler_address]
    )
    assert local.exit_code == remote.exit_code == 1, remote.output  # a few invalid cells
    compare(json.loads(local.stdout), json.loads(remote.stdout))
    assert "partition(s) by unit on the workers" in remote.stderr


def test_agree_starts_a_local_cluster_without_an_address(tmp_path):
    folder = write_dataset(long_table(60, seed=2), tmp_path / "small", by="unit", parts=2)
    base = ["agree", "-c", str(CODEBOOK), str(folder), "--replicates", "50", "--json"]
    runner = CliRunner()
    local = runner.invoke(app, base)
    remote = runner.invoke(app, [*base, "--engine", "dask"])
    assert remote.exit_code == local.exit_code, remote.output
    compare(json.loads(local.stdout), json.loads(remote.stdout))
    assert "local cluster" in remote.stderr


@pytest.mark.parametrize(
    ("extra", "words"),
    [
        (["--scheduler", "tcp://127.0.0.1:1"], "--scheduler goes with --engine dask"),
        (["--engine", "dask", "--units", "units.txt"], "--units"),
        (["--engine", "dask", "--coders"], "--coders"),
    ],
)
def test_usage_errors_of_the_engine_options(tmp_path, extra, words):
    folder = write_dataset(long_table(20, seed=2), tmp_path / "d", by="unit", parts=2)
    (tmp_path / "units.txt").write_text("r1\n", encoding="utf-8")
    args = ["agree", "-c", str(CODEBOOK), str(folder), *extra]
    args = [str(tmp_path / a) if a == "units.txt" else a for a in args]
    result = CliRunner().invoke(app, args)
    assert result.exit_code == 2
    assert words in result.stderr


def test_the_dask_engine_reads_parquet_only(tmp_path):
    (tmp_path / "d").mkdir()
    (tmp_path / "d" / "ana.csv").write_text("unit,coder,variable,value\nr1,ana,species,1\n")
    args = ["agree", "-c", str(CODEBOOK), str(tmp_path / "d"), "--engine", "dask"]
    result = CliRunner().invoke(app, args)
    assert result.exit_code == 2
    assert "long Parquet tables" in result.stderr


def test_without_dask_the_engine_is_refused_with_the_install_command(tmp_path, monkeypatch):
    folder = write_dataset(long_table(20, seed=2), tmp_path / "d", by="unit", parts=2)
    monkeypatch.setitem(sys.modules, "distributed", None)  # import fails as if not installed
    args = ["agree", "-c", str(CODEBOOK), str(folder), "--engine", "dask"]
    result = CliRunner().invoke(app, args)
    assert result.exit_code == 2
    assert "pip install 'coderel[dask]'" in result.stderr


def test_test_retest_data_is_refused_by_the_dask_engine(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    (tmp_path / "d").mkdir()
    table = pa.table(
        {
            "unit": ["r1", "r1"],
            "coder": ["ana", "ana"],
            "variable": ["species", "species"],
            "value": ["1", "2"],
            "occasion": ["1", "2"],
        }
    )
    pq.write_table(table, tmp_path / "d" / "retest.parquet")
    args = ["agree", "-c", str(CODEBOOK), str(tmp_path / "d"), "--engine", "dask"]
    result = CliRunner().invoke(app, args)
    assert result.exit_code == 2
    assert "occasion" in result.stderr


def test_an_address_where_no_scheduler_answers_is_a_usage_error(tmp_path, monkeypatch):
    from coderel.engine import cluster

    monkeypatch.setattr(cluster, "CONNECT_TIMEOUT", 2)
    folder = write_dataset(long_table(20, seed=2), tmp_path / "d", by="unit", parts=2)
    args = ["agree", "-c", str(CODEBOOK), str(folder), "--engine", "dask"]
    result = CliRunner().invoke(app, [*args, "--scheduler", "tcp://127.0.0.1:1"])
    assert result.exit_code == 2
    assert "no Dask scheduler answered at 'tcp://127.0.0.1:1'" in result.stderr
