"""The resumable result store: keys that change with every input, atomic JSON records."""

from __future__ import annotations

import json
import math

import pytest

from covergrid.errors import CovergridError
from covergrid.trade.store import ResultStore, result_key, software_fingerprint

INPUTS = {"design": {"total": 12, "planes": 3, "phasing": 1, "altitude_km": 550.0},
          "context": {"step_s": 60.0, "resolution_deg": 2.0, "epoch": "2030-01-01T00:00:00Z",
                      "software": "0.1.0+abc"}}


def _with(path: tuple[str, str], value):
    out = json.loads(json.dumps(INPUTS))
    out[path[0]][path[1]] = value
    return out


def test_key_is_stable_and_ignores_int_float_spelling():
    assert result_key(INPUTS) == result_key(json.loads(json.dumps(INPUTS)))
    assert result_key(_with(("design", "altitude_km"), 550)) == result_key(INPUTS)
    assert len(result_key(INPUTS)) == 64


@pytest.mark.parametrize("path, value", [
    (("design", "phasing"), 2), (("design", "altitude_km"), 550.000001),
    (("context", "step_s"), 30.0), (("context", "resolution_deg"), 1.0),
    (("context", "epoch"), "2030-01-02T00:00:00Z"), (("context", "software"), "0.1.0+abd"),
])
def test_key_changes_with_any_input(path, value):
    assert result_key(_with(path, value)) != result_key(INPUTS)


def test_software_fingerprint_names_the_version():
    from covergrid import __version__

    fp = software_fingerprint()
    assert fp.startswith(__version__ + "+") and len(fp) == len(__version__) + 17


def test_round_trip_nan_and_no_temporary_files(tmp_path):
    store = ResultStore(tmp_path / "store")
    key = result_key(INPUTS)
    assert store.get(key) is None and key not in store
    store.put(key, {"total": 12, "max_gap_mean": math.nan, "meets": True}, INPUTS)
    assert store.get(key) == {"total": 12, "max_gap_mean": None, "meets": True}
    assert key in store and len(store) == 1 and list(store.keys()) == [key]
    assert [p.name for p in (tmp_path / "store").iterdir()] == [f"{key}.json"]
    record = json.loads((tmp_path / "store" / f"{key}.json").read_text())
    assert record["inputs"]["design"]["altitude_km"] == 550  # canonical form of the inputs


def test_unreadable_or_foreign_records_count_as_missing(tmp_path):
    store = ResultStore(tmp_path)
    key = result_key(INPUTS)
    (tmp_path / f"{key}.json").write_text("{ truncated")
    assert store.get(key) is None
    other = result_key(_with(("design", "phasing"), 2))
    (tmp_path / f"{key}.json").write_text(json.dumps({"format": 1, "key": other, "row": {}}))
    assert store.get(key) is None
    (tmp_path / f"{key}.json").write_text(json.dumps({"format": 99, "key": key, "row": {}}))
    assert store.get(key) is None


def test_key_must_be_hex_so_no_path_escapes(tmp_path):
    store = ResultStore(tmp_path)
    with pytest.raises(CovergridError, match="store.key"):
        store.put("../../etc/passwd", {}, {})
    with pytest.raises(CovergridError, match="64 hex digits"):
        store.get("ABC")


def test_fingerprint_follows_the_modules_the_evaluation_imports():
    # derived from the sources, not a hand-kept list: the kernel, the engine and the metrics
    # decide a row and are found through the evaluation module's imports
    from covergrid.trade.store import result_modules

    names = [n for n, _ in result_modules()]
    for needed in ("covergrid.trade.evaluate", "covergrid.compute.engine",
                   "covergrid.compute.kernel", "covergrid.compute.kernel_state",
                   "covergrid.compute.metrics", "covergrid.orbits.j2",
                   "covergrid.orbits.j2_backends", "covergrid.earth.time",
                   "covergrid.constants"):
        assert needed in names
    # what only draws or writes is not part of the key
    assert not any(n.startswith(("covergrid.render", "covergrid.cli", "covergrid.study"))
                   for n in names)


def test_fingerprint_fails_loudly_when_a_source_is_missing(monkeypatch):
    import importlib.util

    from covergrid.trade import store

    real = importlib.util.find_spec

    def no_kernel_source(name, *args):
        spec = real(name, *args)
        if name == "covergrid.compute.kernel":
            spec = importlib.util.spec_from_loader(name, loader=None, origin=None)
        return spec

    monkeypatch.setattr(store.importlib.util, "find_spec", no_kernel_source)
    with pytest.raises(CovergridError, match="no Python source for module "
                       "'covergrid.compute.kernel'"):
        software_fingerprint()
