"""dossier screen --engine dask: the same rows and numbers as the local engine, on a local cluster of processes.

The pairs are invented (``synthetic_pairs`` of benchmarks/screen.py, seeded). The dask engine runs the
very code of the local engine (reader, kernels, writer) on each partition, so the numbers must be equal
to the last bit, not merely close.
"""

from __future__ import annotations

import importlib.util
import socket
import sys
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from dossier.cli import cli
from dossier.errors import DossierError
from dossier.screen import partitions, screen
from tests.conftest import REPO

N_PAIRS = 2000


def synthetic_pairs(n: int, seed: int) -> dict[str, np.ndarray]:
    spec = importlib.util.spec_from_file_location("screen_benchmark", REPO / "benchmarks" / "screen.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.synthetic_pairs(n, seed=seed)


def write_parquet(path: Path, table, row_group_size: int | None = None) -> Path:
    import pyarrow.parquet as pq

    path.parent.mkdir(parents=True, exist_ok=True)
    pq.write_table(table, path, row_group_size=row_group_size)
    return path


def read_parts(folder: Path):
    """The result folder's parts in the order of their names (the order of the input partitions)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    return pa.concat_tables([pq.read_table(p) for p in sorted(folder.iterdir())])


def assert_same_rows(expected, got) -> None:
    """Same columns, same pairs, every value equal (floats exactly, NaN where NaN)."""
    assert got.schema == expected.schema
    assert got.num_rows == expected.num_rows
    expected, got = expected.sort_by("pair_id"), got.sort_by("pair_id")
    for name in expected.column_names:
        a, b = expected[name].to_numpy(zero_copy_only=False), got[name].to_numpy(zero_copy_only=False)
        if a.dtype.kind == "f":
            np.testing.assert_array_equal(a, b, err_msg=name)  # NaN equals NaN here, nothing else is forgiven
        else:
            assert a.tolist() == b.tolist(), name


@pytest.fixture(scope="module")
def dataset(tmp_path_factory):
    """2000 pairs as a partitioned dataset (two files, one of several row groups) and as one file."""
    import pyarrow as pa

    root = tmp_path_factory.mktemp("dataset")
    table = pa.table(synthetic_pairs(N_PAIRS, seed=5))
    # row groups of 400, 400, 400, 300: with partitions of at most 1000 pairs, [0, 1] and [2, 3]
    write_parquet(root / "pairs" / "north" / "a.parquet", table.slice(0, 1500), row_group_size=400)
    write_parquet(root / "pairs" / "south" / "b.parquet", table.slice(1500))
    (root / "pairs" / "_SUCCESS").write_text("")  # bookkeeping files of dataset writers are skipped
    write_parquet(root / "all.parquet", table)
    return root


@pytest.fixture(scope="module")
def local_result(dataset):
    import pyarrow.parquet as pq

    screen(dataset / "all.parquet", dataset / "local.parquet")
    return pq.read_table(dataset / "local.parquet")


@pytest.fixture(scope="module")
def cluster():
    """A running cluster of two single-threaded worker processes, reached by its address."""
    pytest.importorskip("dask")
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as running:
        yield running


@pytest.fixture
def needs_dask():
    pytest.importorskip("dask")
    pytest.importorskip("distributed")


def test_partitions_split_parquet_files_between_row_groups(dataset):
    parts = partitions(dataset / "pairs", chunk_rows=1000)
    assert [(Path(p.source).name, p.row_groups, p.first_row, p.name) for p in parts] == [
        ("a.parquet", (0, 1), 0, "part-00000.parquet"),
        ("a.parquet", (2, 3), 800, "part-00001.parquet"),
        ("b.parquet", (0,), 0, "part-00002.parquet"),
    ]
    assert all(Path(p.path).is_absolute() for p in parts)


def test_the_default_local_cluster_gives_exactly_the_local_engines_rows(dataset, local_result, needs_dask, tmp_path):
    out = tmp_path / "result.parquet"
    result = CliRunner().invoke(cli, ["screen", str(dataset / "pairs"), "--out", str(out), "--engine", "dask",
                                      "--workers", "2", "--chunk", "1000"])
    assert result.exit_code == 0, result.output
    assert f"screened {N_PAIRS} pair(s) into {out}" in result.output
    assert sorted(p.name for p in out.iterdir()) == ["part-00000.parquet", "part-00001.parquet", "part-00002.parquet"]
    parts = read_parts(out)
    assert parts["pair_id"].to_pylist() == local_result["pair_id"].to_pylist()  # parts in input order
    assert_same_rows(local_result, parts)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result.parquet"]  # no temporary folder left


def test_a_scheduler_address_is_used_and_an_earlier_result_replaced(cluster, tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pa.table(synthetic_pairs(200, seed=10))
    write_parquet(tmp_path / "pairs" / "a.parquet", table.slice(0, 120))
    write_parquet(tmp_path / "pairs" / "b.parquet", table.slice(120))
    screen(write_parquet(tmp_path / "all.parquet", table), tmp_path / "local.parquet")
    out = tmp_path / "result"
    out.mkdir()
    (out / "part-00007.parquet").write_bytes(b"an earlier result")
    result = CliRunner().invoke(cli, ["screen", str(tmp_path / "pairs"), "--out", str(out), "--engine", "dask",
                                      "--scheduler", cluster.scheduler_address])
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in out.iterdir()) == ["part-00000.parquet", "part-00001.parquet"]
    assert_same_rows(pq.read_table(tmp_path / "local.parquet"), read_parts(out))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["all.parquet", "local.parquet", "pairs", "result"]
    assert "screen_partition" in cluster.scheduler.task_prefixes  # that cluster did the work


def test_a_bad_cell_in_one_partition_names_its_file_and_row_and_nothing_is_written(cluster, tmp_path):
    import pyarrow as pa

    from dossier.screen import screen_dask

    good = pa.table(synthetic_pairs(30, seed=6))
    bad = synthetic_pairs(30, seed=7)
    plx = bad["parallax2"].astype(object)
    plx[24] = "ten"  # row 25 of the file, in its third row group: the partition that starts at row 20
    bad["parallax2"] = plx.astype(str)
    write_parquet(tmp_path / "pairs" / "a.parquet", good, row_group_size=10)
    write_parquet(tmp_path / "pairs" / "b.parquet", pa.table(bad), row_group_size=10)
    out = tmp_path / "result"
    with pytest.raises(DossierError) as caught:
        screen_dask(tmp_path / "pairs", out, chunk_rows=10, scheduler=cluster.scheduler_address)
    assert str(caught.value).startswith(f"{tmp_path / 'pairs' / 'b.parquet'}: row 25: column 'parallax2' (parallax2) "
                                        "is not a number. Fix:")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["pairs"]  # no result, no temporary folder


def test_a_folder_of_csv_files_is_read_as_the_local_engine_reads_it(cluster, tmp_path):
    import pyarrow as pa
    import pyarrow.csv as pcsv
    import pyarrow.parquet as pq

    from dossier.screen import screen_dask

    for name, seed in (("a.csv", 8), ("b.csv", 9)):
        (tmp_path / "pairs").mkdir(exist_ok=True)
        pcsv.write_csv(pa.table(synthetic_pairs(40, seed=seed)), tmp_path / "pairs" / name)
    assert screen_dask(tmp_path / "pairs", tmp_path / "result", scheduler=cluster.scheduler_address) == 80
    for i, name in enumerate(("a.csv", "b.csv")):
        screen(tmp_path / "pairs" / name, tmp_path / f"{name}.parquet")
        assert_same_rows(pq.read_table(tmp_path / f"{name}.parquet"),
                         pq.read_table(tmp_path / "result" / f"part-0000{i}.parquet"))


def test_results_that_cannot_be_a_folder_of_parts_are_refused_before_any_work(dataset, needs_dask, tmp_path):
    runner = CliRunner()
    (tmp_path / "notes").mkdir()
    (tmp_path / "notes" / "keep.txt").write_text("mine")
    for out, message in ((tmp_path / "result.csv", "writes a folder of Parquet parts, not a CSV file"),
                         (tmp_path / "notes", "exists and is not a folder of screen results"),
                         (dataset / "pairs" / "result", "is inside the folder of pairs")):
        result = runner.invoke(cli, ["screen", str(dataset / "pairs"), "--out", str(out), "--engine", "dask"])
        assert result.exit_code == 2, result.output
        assert message in result.output and "Fix:" in result.output
    assert (tmp_path / "notes" / "keep.txt").read_text() == "mine"
    assert not (dataset / "pairs" / "result").exists()


def test_an_unreachable_scheduler_is_a_clear_error(dataset, needs_dask, tmp_path, monkeypatch):
    import dossier.screen

    monkeypatch.setattr(dossier.screen, "CONNECT_TIMEOUT", 1)
    with socket.socket() as s:  # a port nothing listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    result = CliRunner().invoke(cli, ["screen", str(dataset / "pairs"), "--out", str(tmp_path / "r"),
                                      "--engine", "dask", "--scheduler", f"tcp://127.0.0.1:{port}"])
    assert result.exit_code == 2, result.output
    assert f"--scheduler tcp://127.0.0.1:{port}: could not reach a dask scheduler there" in result.output
    assert list(tmp_path.iterdir()) == []


def test_without_dask_the_engine_says_how_to_install_it(dataset, tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed raises ImportError
    result = CliRunner().invoke(cli, ["screen", str(dataset / "pairs"), "--out", str(tmp_path / "r"),
                                      "--engine", "dask"])
    assert result.exit_code == 2
    assert "Fix: pip install 'dossier[dask]'." in result.output
    assert list(tmp_path.iterdir()) == []


def test_options_of_the_dask_engine_and_folders_are_refused_by_the_local_engine(dataset, tmp_path):
    runner = CliRunner()
    result = runner.invoke(cli, ["screen", str(dataset / "all.parquet"), "--out", str(tmp_path / "r.csv"),
                                 "--scheduler", "tcp://127.0.0.1:8786"])
    assert result.exit_code == 2
    assert "--scheduler applies to the dask engine only. Fix: add --engine dask." in result.output
    result = runner.invoke(cli, ["screen", str(dataset / "pairs"), "--out", str(tmp_path / "r.csv")])
    assert result.exit_code == 2 and "is a folder; the local engine reads one file" in result.output
    assert "--engine dask" in result.output
    result = runner.invoke(cli, ["screen", str(dataset / "all.parquet"), "--out", str(dataset)])
    assert result.exit_code == 2 and "is a folder; the local engine writes one .csv or .parquet file" in result.output
    assert list(tmp_path.iterdir()) == []
