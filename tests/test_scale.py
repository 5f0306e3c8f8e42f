"""Checkpoint/resume and the dask cluster backend: same results, nothing lost or doubled."""

import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

import adversaries
from harness import ConfigError, run, runner
from harness.learners import get as get_learner


def _args():
    return get_learner("ftpl"), adversaries.get("bernoulli", p=0.4), 300, 4


def test_resume_after_interruption_recomputes_only_missing_chunks(tmp_path, monkeypatch):
    clean = run(*_args(), replicas=1000, seed=3, chunk=100)
    calls = []
    real = runner.play_chunk

    def interrupted(*a):
        if len(calls) == 4:
            raise KeyboardInterrupt  # as Ctrl-C would, after four chunks
        calls.append(a[5])
        return real(*a)

    monkeypatch.setattr(runner, "play_chunk", interrupted)
    with pytest.raises(KeyboardInterrupt):
        run(*_args(), replicas=1000, seed=3, chunk=100, checkpoint=tmp_path)
    assert sorted(p.name for p in tmp_path.glob("chunk-*.npz")) == [f"chunk-{k:06d}.npz" for k in range(4)]

    calls.clear()
    monkeypatch.setattr(runner, "play_chunk", lambda *a: calls.append(a[5]) or real(*a))
    resumed = run(*_args(), replicas=1000, seed=3, chunk=100, checkpoint=tmp_path)
    assert calls == list(range(4, 10)) and resumed.meta["resumed_chunks"] == 4
    assert np.array_equal(resumed.regret, clean.regret) and np.array_equal(resumed.switches, clean.switches)

    calls.clear()  # a third run computes nothing
    again = run(*_args(), replicas=1000, seed=3, chunk=100, checkpoint=tmp_path)
    assert calls == [] and np.array_equal(again.regret, clean.regret)


def test_checkpoint_of_another_run_is_refused(tmp_path):
    run(*_args(), replicas=50, seed=1, chunk=25, checkpoint=tmp_path)
    with pytest.raises(ConfigError, match=r"holds a different run \(differs in: seed\)"):
        run(*_args(), replicas=50, seed=2, chunk=25, checkpoint=tmp_path)
    with pytest.raises(ConfigError, match="differs in: learner"):
        run(get_learner("hedge"), *_args()[1:], replicas=50, seed=1, chunk=25, checkpoint=tmp_path)


def test_corrupt_chunk_file_is_named(tmp_path):
    run(*_args(), replicas=50, seed=1, chunk=25, checkpoint=tmp_path)
    (tmp_path / "chunk-000001.npz").write_bytes(b"not a zip file")
    with pytest.raises(ConfigError, match="chunk-000001.npz is corrupt"):
        run(*_args(), replicas=50, seed=1, chunk=25, checkpoint=tmp_path)
    np.savez(tmp_path / "chunk-000001.npz", regret=np.zeros(3), switches=np.zeros(3, dtype=np.int64))
    with pytest.raises(ConfigError, match="does not hold 25 replicas"):
        run(*_args(), replicas=50, seed=1, chunk=25, checkpoint=tmp_path)


CLI = [sys.executable, "-m", "harness", "run", "--learner", "ftpl", "--adversary", "bernoulli",
       "--horizon", "40000", "--actions", "4", "--replicas", "1024", "--seed", "5", "--json"]


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGKILL])
def test_cli_resume_after_a_real_signal(tmp_path, sig):
    """Kill a real `boundbreaker run --checkpoint` process (Ctrl-C, or SIGKILL as a lost
    machine would), rerun it, and get exactly the uninterrupted result."""
    ckpt = tmp_path / "ckpt"
    proc = subprocess.Popen(CLI + ["--checkpoint", str(ckpt)], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    deadline = time.time() + 120
    while len(list(ckpt.glob("chunk-*.npz"))) < 1 and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    proc.send_signal(sig)
    proc.communicate(timeout=60)
    saved = len(list(ckpt.glob("chunk-*.npz")))
    assert 1 <= saved < 4, "the run should have been interrupted part-way"
    assert not list(ckpt.glob(".tmp-*")) or sig == signal.SIGKILL
    resumed = subprocess.run(CLI + ["--checkpoint", str(ckpt)], capture_output=True, text=True, timeout=300)
    clean = subprocess.run(CLI, capture_output=True, text=True, timeout=300)
    assert resumed.returncode == 0 and clean.returncode == 0, resumed.stderr + clean.stderr
    a, b = json.loads(resumed.stdout), json.loads(clean.stdout)
    assert a["meta"]["resumed_chunks"] == saved
    assert a["summary"] == b["summary"]


def test_local_dask_cluster_gives_bit_identical_results():
    pytest.importorskip("dask.distributed")
    from harness.cluster import cluster

    for learner, adv in [(get_learner("hedge"), adversaries.get("bernoulli", shared=True)),
                         (get_learner("ftpl"), adversaries.get("bernoulli", p=[0.3, 0.5, 0.5]))]:
        local = run(learner, adv, 400, 3, replicas=700, seed=12, chunk=100)
        with cluster("local", n_workers=2):
            remote = run(learner, adv, 400, 3, replicas=700, seed=12, chunk=100, n_jobs=-1)
        assert np.array_equal(local.regret, remote.regret) and np.array_equal(local.switches, remote.switches)


def test_unreachable_cluster_is_a_one_line_error():
    pytest.importorskip("dask.distributed")
    from harness.cluster import cluster

    with pytest.raises(ConfigError, match=r"cannot reach a dask scheduler at 'tcp://127.0.0.1:1'"):
        with cluster("tcp://127.0.0.1:1", timeout="1s"):
            pass
    with pytest.raises(ConfigError, match="give 'local' or a scheduler address"):
        with cluster(""):
            pass


def test_certification_resumes_from_its_checkpoint(tmp_path, monkeypatch):
    """An interrupted certification, rerun with the same checkpoint directory, plays only the
    chunks it had not finished and reaches the same certificate as an uninterrupted one."""
    from harness.certify import certify
    from harness.claims import Claim

    claims = [Claim(metric="regret", bound="sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", name="hp"),
              Claim(metric="switches", bound=30, kind="always", name="cap")]
    battery = dict(adversaries=[adversaries.get("bernoulli", p=0.5), adversaries.get("alternating")],
                   horizons=[200], n_actions=[2, 4], max_replicas=2000, seed=4, chunk=64)
    clean = certify(get_learner("hedge"), claims, **battery)

    calls = []
    real = runner.play_chunk

    def counting(*a):
        if len(calls) == 7:
            raise KeyboardInterrupt
        calls.append(a)
        return real(*a)

    monkeypatch.setattr(runner, "play_chunk", counting)
    with pytest.raises(KeyboardInterrupt):
        certify(get_learner("hedge"), claims, **battery, checkpoint=tmp_path)
    assert len(list(tmp_path.glob("group-*.npz"))) == 7
    calls.clear()
    monkeypatch.setattr(runner, "play_chunk", lambda *a: calls.append(a) or real(*a))
    resumed = certify(get_learner("hedge"), claims, **battery, checkpoint=tmp_path)
    total = len(list(tmp_path.glob("group-*.npz")))
    assert len(calls) == total - 7
    strip = lambda c: {k: v for k, v in c.as_dict().items()}  # noqa: E731
    assert [strip(c) for c in resumed.cells] == [strip(c) for c in clean.cells]
