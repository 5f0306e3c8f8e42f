"""Counterexample files: round trip, and corrupted or hostile files refused in one line."""

import io
import json
import math
import os
import pickle
import zipfile

import numpy as np
import pytest

from harness.claims import Claim
from harness.errors import ConfigError
from harness.learners import get
from harness.search import Counterexample, search


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    """One real counterexample (hot Hedge, T=1000), saved once for the module."""
    claim = Claim("regret", "sqrt(T * ln(n) / 2) + sqrt(T * ln(1 / delta) / 2)", delta=0.05, name="hp",
                  source="Cesa-Bianchi and Lugosi 2006, Thm 2.2, plus Hoeffding-Azuma")
    found = search(get("hedge", eta=10 * math.sqrt(8 * math.log(2) / 1000)), claim, 1000, 2, max_examples=60,
                   replicas=128, seed=0)
    assert found
    path = tmp_path_factory.mktemp("ce") / "hot.npz"
    found.save(path)
    return found, path


def test_round_trip_keeps_every_field(saved):
    found, path = saved
    back = Counterexample.load(path)
    assert np.array_equal(back.losses, found.losses) and back.losses.dtype == np.float64
    assert back.claim == found.claim and back.genome == found.genome
    assert (back.rate, back.ci, back.violations, back.replicas) == (found.rate, tuple(found.ci), found.violations,
                                                                  found.replicas)
    assert back.seeds == found.seeds and back.learner == found.learner and back.method == found.method
    assert back.evaluations == found.evaluations and back.evaluations_to_find == found.evaluations_to_find
    assert back.versions["numpy"] == np.__version__ and back.evidence == found.evidence
    assert back.metadata() == found.metadata()
    assert sorted(os.listdir(path.parent)) == ["hot.npz"]        # no temporary file left behind


def test_callable_bound_is_saved_as_its_value(saved, tmp_path):
    found, _ = saved
    value = found.bound
    found.claim = Claim("regret", lambda T, n, d: value, delta=0.05, name="callable")
    try:
        found.save(tmp_path / "c.npz")
        back = Counterexample.load(tmp_path / "c.npz")
    finally:
        found.claim = Counterexample.load(saved[1]).claim
    assert back.claim.bound == pytest.approx(value) and back.bound == pytest.approx(value)


def _members(path):
    with np.load(path, allow_pickle=False) as z:
        return {"losses": z["losses"], "metadata": json.loads(str(z["metadata"][()]))}


def _write(path, losses=None, metadata=None, extra=None, raw_meta=None):
    buf = {}
    if losses is not None:
        buf["losses"] = losses
    if raw_meta is not None:
        buf["metadata"] = raw_meta
    elif metadata is not None:
        buf["metadata"] = np.array(json.dumps(metadata))
    buf.update(extra or {})
    with open(path, "wb") as fh:
        np.savez(fh, **buf)
    return path


def _meta_change(meta, dotted, value, delete=False):
    meta = json.loads(json.dumps(meta))
    obj = meta
    keys = dotted.split(".")
    for k in keys[:-1]:
        obj = obj[k]
    if delete:
        del obj[keys[-1]]
    else:
        obj[keys[-1]] = value
    return meta


HOSTILE_META = [
    ("extra", "surprise", 1, "unknown field 'surprise'"),
    ("extra", "claim.hidden", 1, "claim: unknown field 'hidden'"),
    ("delete", "seeds", None, "missing field 'seeds'"),
    ("set", "format", "other.format", "format must be"),
    ("set", "version", 99, "version 99 is not supported"),
    ("set", "horizon", 7, "metadata says (7,"),
    ("set", "result.rate", 1.5, "result.rate"),
    ("set", "result.violations", 10 ** 9, "exceeds result.replicas"),
    ("set", "result.ci", [0.9, 0.1], "result.ci low"),
    ("set", "result.confidence", 1.0, "confidence"),
    ("set", "claim.kind", "sometimes", "claim.metric/kind"),
    ("set", "claim.bound", "__import__('os')", "not allowed"),
    ("set", "claim.delta", "0.05", "claim.delta"),
    ("set", "seeds.confirm", -1, "seeds.confirm"),
    ("set", "search.method", "oracle", "search.method"),
    ("set", "genome.permutation", [0, 1, 2], "genome.permutation has 3 actions"),
    ("set", "genome.segments", [{"pattern": "zigzag", "weight": 1, "params": {}}], "pattern"),
    ("set", "learner.params", [1, 2], "learner.params"),
    ("set", "versions", {"numpy": 2}, "versions"),
]


@pytest.mark.parametrize("how, field, value, text", HOSTILE_META)
def test_bad_metadata_is_refused_in_one_line(saved, tmp_path, how, field, value, text):
    parts = _members(saved[1])
    meta = _meta_change(parts["metadata"], field, value, delete=(how == "delete"))
    path = _write(tmp_path / "bad.npz", parts["losses"], meta)
    with pytest.raises(ConfigError) as err:
        Counterexample.load(path)
    assert text in str(err.value) and "\n" not in str(err.value) and "bad.npz" in str(err.value)


def _losses_case(saved, change):
    losses = _members(saved[1])["losses"].copy()
    return change(losses)


HOSTILE_LOSSES = [
    (lambda x: np.where(np.arange(x.size).reshape(x.shape) == 5, np.nan, x), "must be finite"),
    (lambda x: x + 1.0, "must lie in [0, 1]"),
    (lambda x: -x, "must lie in [0, 1]"),
    (lambda x: x[:, :1], "shape"),
    (lambda x: x[None], "dimensions"),
    (lambda x: x[:-1], "metadata says"),
    (lambda x: x.astype(np.float32), "float64"),
    (lambda x: x.astype(np.int64), "must be float64"),
    (lambda x: x.astype(">f8"), "float64"),
]


@pytest.mark.parametrize("change, text", HOSTILE_LOSSES)
def test_bad_losses_are_refused_in_one_line(saved, tmp_path, change, text):
    parts = _members(saved[1])
    path = _write(tmp_path / "bad.npz", _losses_case(saved, change), parts["metadata"])
    with pytest.raises(ConfigError) as err:
        Counterexample.load(path)
    assert text in str(err.value) and "\n" not in str(err.value)


def test_pickled_objects_extra_members_and_foreign_files_are_refused(saved, tmp_path):
    parts = _members(saved[1])
    cases = {
        "object member": _write(tmp_path / "obj.npz", parts["losses"],
                                raw_meta=np.array([{"evil": 1}], dtype=object)),
        "extra member": _write(tmp_path / "extra.npz", parts["losses"], parts["metadata"],
                               extra={"payload": np.zeros(3)}),
        "missing member": _write(tmp_path / "missing.npz", parts["losses"]),
        "meta not a string": _write(tmp_path / "num.npz", parts["losses"], raw_meta=np.zeros(2)),
        "meta not JSON": _write(tmp_path / "notjson.npz", parts["losses"], raw_meta=np.array("{oops")),
        "meta NaN": _write(tmp_path / "nan.npz", parts["losses"],
                           raw_meta=np.array(json.dumps(_meta_change(parts["metadata"], "result.rate",
                                                                      float("nan"))))),
        "meta a list": _write(tmp_path / "list.npz", parts["losses"], raw_meta=np.array("[1, 2]")),
    }
    pickled = tmp_path / "pickle.npz"
    pickled.write_bytes(pickle.dumps({"losses": [[0.0, 1.0]]}))
    cases["plain pickle"] = pickled
    npy = tmp_path / "plain.npy"
    np.save(npy, parts["losses"])
    cases["a .npy file"] = npy
    truncated = tmp_path / "trunc.npz"
    truncated.write_bytes(saved[1].read_bytes()[:200])
    cases["truncated"] = truncated
    text = tmp_path / "text.npz"
    text.write_text("losses,0,1\n")
    cases["text"] = text
    cases["missing file"] = tmp_path / "nowhere.npz"
    expected = {"object member": "pickled", "extra member": "unexpected member 'payload'",
                "missing member": "missing member 'metadata'", "meta not a string": "unicode string",
                "meta not JSON": "not valid JSON", "meta NaN": "not valid JSON", "meta a list": "JSON object",
                "plain pickle": "not a counterexample file", "a .npy file": "not a counterexample file",
                "truncated": "counterexample file", "text": "not a counterexample file",
                "missing file": "no such counterexample file"}
    for name, path in cases.items():
        with pytest.raises(ConfigError) as err:
            Counterexample.load(path)
        msg = str(err.value)
        assert expected[name] in msg and "\n" not in msg, (name, msg)


def test_an_oversized_member_is_refused_before_it_is_read(saved, tmp_path):
    """The header says (2**20, 64) float64 (512 MiB): refused from the header alone, never allocated."""
    parts = _members(saved[1])
    header = io.BytesIO()
    np.lib.format.write_array_header_1_0(header, {"descr": "<f8", "fortran_order": False,
                                                  "shape": (1 << 20, 64)})
    meta = io.BytesIO()
    np.save(meta, np.array(json.dumps(parts["metadata"])))
    path = tmp_path / "huge.npz"
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr("losses.npy", header.getvalue())
        zf.writestr("metadata.npy", meta.getvalue())
    with pytest.raises(ConfigError, match="too large"):
        Counterexample.load(path)
