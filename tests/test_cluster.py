"""Head-sum blocks on a Dask LocalCluster on loopback (two workers)."""

from __future__ import annotations

import dataclasses
import os
import signal
from pathlib import Path

import pytest

distributed = pytest.importorskip("distributed")

from spotcheck.engine import backend, blocks  # noqa: E402
from spotcheck.engine.api import extract, extract_comb  # noqa: E402
from spotcheck.engine.blocks import BlockRecord, compute_block, compute_comb_block  # noqa: E402
from spotcheck.engine.cluster import connect, dask_runner  # noqa: E402
from spotcheck.errors import CertificationError, UsageError  # noqa: E402

from .reference import pi_hex  # noqa: E402

POSITION = 50_000
BLOCK_K = 256  # bellard: 20,000 values of k in 79 blocks
EXPECTED = pi_hex(POSITION + 13)[POSITION - 1 :]  # gmpy2/MPFR, not spotcheck


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=False,
        protocol="tcp",
        host="127.0.0.1",
        dashboard_address=None,
    ) as lc:
        yield lc


@pytest.fixture(scope="module")
def client(cluster):
    with distributed.Client(cluster, set_as_default=False) as c:
        yield c


def test_cluster_digits_equal_single_process(cluster) -> None:
    seen = []
    result = extract(
        "pi", POSITION, 14, block_k=BLOCK_K, cluster=cluster.scheduler_address, block_progress=seen.append
    )
    assert result.digits == EXPECTED == extract("pi", POSITION, 14).digits
    assert seen[-1].done == seen[-1].total > 50


def test_both_workers_took_blocks(client) -> None:
    result = extract("pi", POSITION, 14, formula="bbp", block_k=BLOCK_K, cluster=client)
    assert result.digits == EXPECTED
    # Each worker ran some of the blocks (keys are named after the task function).
    per_worker = client.run(
        lambda dask_worker: sum(1 for k in dask_worker.state.log if "compute_block" in str(k))
    )
    assert len(per_worker) == 2 and all(n > 0 for n in per_worker.values())


def test_cluster_with_checkpoint(client, tmp_path: Path) -> None:
    path = tmp_path / "cp.json"
    assert extract("pi", POSITION, 14, block_k=BLOCK_K, cluster=client, checkpoint=path).digits == EXPECTED
    # The same checkpoint serves a local run: nothing is computed again.
    progress = []
    assert extract(
        "pi", POSITION, 14, block_k=BLOCK_K, checkpoint=path, block_progress=progress.append
    ).digits == (EXPECTED)
    assert progress[-1].computed == 0 and progress[-1].resumed == progress[-1].total


def out_of_range_block(series, d, words, k0, k1):
    """A faulty worker: a value beyond 2^P for one block."""
    record = compute_block(series, d, words, k0, k1)
    if k0 == 5 * BLOCK_K:
        return BlockRecord(record.series, d, words, k0, k1, record.value + (1 << (64 * words)), record.terms)
    return record


def shifted_block(series, d, words, k0, k1):
    """A faulty worker: reports another range than it was given."""
    record = compute_block(series, d, words, k0, k1)
    return BlockRecord(record.series, d, words, k0 + 1, k1 + 1, record.value, record.terms)


@pytest.mark.parametrize("task", [out_of_range_block, shifted_block])
def test_bad_worker_result_is_rejected(client, task, monkeypatch: pytest.MonkeyPatch) -> None:
    def runner_with_bad_task(c):
        return dask_runner(c, compute=task)

    monkeypatch.setattr("spotcheck.engine.cluster.dask_runner", runner_with_bad_task)
    with pytest.raises(CertificationError, match="rejected"):
        extract("pi", POSITION, 14, block_k=BLOCK_K, cluster=client)


# A comb of 5 windows 997 positions apart from POSITION: 85 comb blocks, each one task for all windows.
COMB = {"gap": 997, "count": 5, "digits": 12, "formula": "bellard", "block_k": BLOCK_K}
COMB_EXPECTED = tuple(
    pi_hex(POSITION + 4 * 997 + 12)[p - 1 : p + 11] for p in range(POSITION, POSITION + 5 * 997, 997)
)


def test_comb_blocks_on_the_cluster_with_a_checkpoint(client, tmp_path: Path) -> None:
    path = tmp_path / "comb.json"
    result = extract_comb("pi", POSITION, cluster=client, checkpoint=path, **COMB)
    assert result.digits == COMB_EXPECTED and result.blocks_computed > 80
    tasks = client.run(lambda dask_worker: sum("compute_comb_block" in str(k) for k in dask_worker.state.log))
    assert sum(tasks.values()) > 0
    again = extract_comb("pi", POSITION, checkpoint=path, **COMB)  # the cluster's journal serves a local run
    assert again.digits == COMB_EXPECTED and again.blocks_computed == 0


def shifted_comb_block(series, d0, step, count, words, k0, k1):
    """A faulty worker: reports another range than it was given."""
    record = compute_comb_block(series, d0, step, count, words, k0, k1)
    return dataclasses.replace(record, k0=k0 + 1)


def test_bad_comb_worker_result_is_rejected(client, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(
        "spotcheck.engine.cluster.dask_runner", lambda c: dask_runner(c, compute=shifted_comb_block)
    )
    with pytest.raises(CertificationError, match="rejected"):
        extract_comb("pi", POSITION, cluster=client, **COMB)


def test_unreachable_scheduler_is_a_usage_error(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr("spotcheck.engine.cluster.CONNECT_TIMEOUT", 1)
    with pytest.raises(UsageError, match="cannot reach"):
        connect("tcp://127.0.0.1:9")


def test_blocks_module_does_not_import_dask() -> None:
    import subprocess
    import sys

    code = "import sys, spotcheck.engine.api, spotcheck.engine.blocks; print('distributed' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
    assert blocks.compute_block is compute_block


@pytest.mark.skipif(backend.BACKEND != "c", reason="needs blocks slow enough to lose a worker mid-run")
def test_lost_worker_blocks_are_recomputed(monkeypatch: pytest.MonkeyPatch) -> None:
    # Two worker processes; one is killed (SIGKILL) once a few blocks are in.
    # Dask reruns its blocks elsewhere and the digits are still right.
    root = str(Path(__file__).resolve().parents[1])
    monkeypatch.setenv("PYTHONPATH", root + os.pathsep + os.environ.get("PYTHONPATH", ""))
    with (
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=":0"
        ) as lc,
        distributed.Client(lc, set_as_default=False) as c,
    ):
        pids = list(c.run(os.getpid).values())
        killed = []

        def on_block(p) -> None:
            if p.done == 4 and not killed:
                os.kill(pids[0], signal.SIGKILL)
                killed.append(pids[0])

        digits = extract(
            "pi", 10_000_000, 14, formula="bbp", block_k=1 << 18, cluster=c, block_progress=on_block
        ).digits
    assert killed
    # Bailey, Borwein, Plouffe, Math. Comp. 66 (1997): hex digits of pi at 10^7.
    assert digits == "17AF5863EFED8D"


def test_verify_and_locate_on_a_cluster(cluster, tmp_path, capsys) -> None:
    from spotcheck.cli import run

    digits = pi_hex(POSITION)
    bad = digits[:40_000] + "".join("0123456789ABCDEF"[(int(c, 16) + 5) % 16] for c in digits[40_000:])
    path = tmp_path / "astray.txt"
    path.write_text("3." + bad + "\n")
    address = cluster.scheduler_address
    assert run(["verify", str(path), "--cluster", address, "--seed", "1", "--quiet"]) == 1
    assert run(["locate", str(path), "--cluster", address, "--json"]) == 1
    import json

    assert json.loads(capsys.readouterr().out)["first_mismatch"] == 40_001


def test_verify_checkpoint_auto_keeps_one_journal(tmp_path, monkeypatch, capsys) -> None:
    from spotcheck.cli import run

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    path = tmp_path / "pi.txt"
    path.write_text("3." + pi_hex(20_000) + "\n")
    # --budget 0: windows only (a full comparison of 20,000 digits would otherwise replace the samples)
    args = ["verify", str(path), "--checkpoint", "auto", "--samples", "2", "--seed", "4", "--budget", "0"]
    assert run([*args, "--quiet"]) == 0
    kept = sorted((tmp_path / "cache" / "spotcheck").glob("*.json"))
    assert len(kept) == 1  # head, tail and two samples: one journal for the check
    sections = [ln for ln in kept[0].read_text().splitlines() if ln.startswith('{"section"')]
    assert len(sections) >= 3
    (tmp_path / "one.json").write_text("{}")  # not a journal: refused, left alone
    assert run(["verify", str(path), "--checkpoint", str(tmp_path / "one.json")]) == 2
    assert "refused" in capsys.readouterr().err
    assert (tmp_path / "one.json").read_text() == "{}"
