"""A run's merged partial result on disk (``partial.npz`` in the results folder).

``evtkin merge`` needs what a results folder's normalised histograms no longer hold: Σw, Σw²
and the entry counts per *normalisation group* (sample, file, process) with the weights as
written, the cutflow counters and event totals of each group, and each file's run information
(IDWTUP, declared cross sections, weight names and groups). With them, the merge of several
folders is finalised exactly like one run that read every input.

The file is a numpy ``.npz`` archive without any pickled object: the arrays of each group
plus one JSON document (the array ``"meta"``) naming them. Floats in the JSON are written
with Python's shortest round-trip representation, so they read back bit for bit. Run
information objects are evtkin dataclasses; they are written as their fields and rebuilt
only if their type is an evtkin dataclass (nothing else is ever constructed on reading).
"""

from __future__ import annotations

import dataclasses
import importlib
import io
import json
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from evtkin.errors import ResultsError
from evtkin.files import atomic_write_bytes
from evtkin.hists.fill import HistAccumulator, HistSpec
from evtkin.run.partial import Cutflow, FileRecord, PartialResult, ProcessTotals

__all__ = ["PARTIAL_FILE", "load_partial", "save_partial"]

#: the file name inside a results folder
PARTIAL_FILE = "partial.npz"
_FORMAT = "evtkin-partial"
_VERSION = 1


# --------------------------------------------------------------------------- run information

def _encode(value: Any) -> Any:
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        cls = type(value)
        return {"__dataclass__": f"{cls.__module__}:{cls.__qualname__}",
                "fields": {f.name: _encode(getattr(value, f.name))
                           for f in dataclasses.fields(value)}}
    if isinstance(value, tuple):
        return {"__tuple__": [_encode(v) for v in value]}
    if isinstance(value, list):
        return [_encode(v) for v in value]
    if isinstance(value, Mapping):
        if not all(isinstance(k, str) for k in value):
            raise TypeError("only mappings with string keys can be stored")
        return {"__mapping__": {k: _encode(v) for k, v in value.items()}}
    if isinstance(value, np.ndarray):
        return {"__array__": value.tolist()}
    if isinstance(value, np.generic):
        return value.item()
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    raise TypeError(f"cannot store a {type(value).__name__} in {PARTIAL_FILE}")


#: record types that moved, under the name older folders store
_MOVED = {"evtkin.run.ntuple_input:NtupleRunInfo": "evtkin.run.inputs.ntuple:NtupleRunInfo"}


def _decode(value: Any, where: str) -> Any:
    if isinstance(value, list):
        return [_decode(v, where) for v in value]
    if not isinstance(value, dict):
        return value
    if "__tuple__" in value:
        return tuple(_decode(v, where) for v in value["__tuple__"])
    if "__mapping__" in value:
        return {k: _decode(v, where) for k, v in value["__mapping__"].items()}
    if "__array__" in value:
        return np.asarray(value["__array__"], dtype=np.float64)
    if "__dataclass__" in value:
        stored = str(value["__dataclass__"])
        module, _, name = _MOVED.get(stored, stored).partition(":")
        if module != "evtkin" and not module.startswith("evtkin."):
            raise ResultsError(f"{where}: refusing to rebuild a {module}:{name} object")
        try:
            cls: Any = importlib.import_module(module)
            for part in name.split("."):
                cls = getattr(cls, part)
        except (ImportError, AttributeError):
            raise ResultsError(f"{where}: this evtkin has no {module}:{name} "
                               "(the folder was written by another version)") from None
        if not (isinstance(cls, type) and dataclasses.is_dataclass(cls)):
            raise ResultsError(f"{where}: {module}:{name} is not a record type")
        fields = {k: _decode(v, where) for k, v in value["fields"].items()}
        try:
            return cls(**fields)
        except TypeError as exc:
            raise ResultsError(f"{where}: cannot rebuild {name}: {exc}") from None
    return {k: _decode(v, where) for k, v in value.items()}


# --------------------------------------------------------------------------- writing

def save_partial(folder: str | os.PathLike[str], partial: PartialResult, *,
                 config_sha256: str) -> Path:
    """Write ``partial`` to ``folder/partial.npz`` (through a temporary name)."""
    arrays: dict[str, np.ndarray] = {}
    hists = []
    for k, (key, acc) in enumerate(sorted(partial.hists.items())):
        arrays[f"h{k}_w"] = np.ascontiguousarray(acc._w)
        arrays[f"h{k}_w2"] = np.ascontiguousarray(acc._w2)
        counts = getattr(acc, "counts", None)
        if counts is not None:
            arrays[f"h{k}_n"] = np.ascontiguousarray(counts)
        hists.append({"key": list(key), "entries": int(acc.entries),
                      "variations": list(acc.variations)})
    cutflows = []
    for k, (ckey, cf) in enumerate(sorted(partial.cutflows.items())):
        arrays[f"c{k}_n"] = cf.n_raw
        arrays[f"c{k}_w"] = cf.sum_w
        arrays[f"c{k}_w2"] = cf.sum_w2
        cutflows.append(list(ckey))
    totals = []
    for k, (tkey, t) in enumerate(sorted(partial.totals.items())):
        arrays[f"t{k}_var"] = np.asarray(t.sum_var, dtype=np.float64)
        totals.append({"key": list(tkey), "n_events": int(t.n_events), "sum_w": float(t.sum_w),
                       "sum_w2": float(t.sum_w2), "sum_abs_w": float(t.sum_abs_w),
                       "n_negative": int(t.n_negative)})
    files = []
    for (_, _), rec in sorted(partial.files.items()):
        files.append({"sample": rec.sample, "index": rec.index, "path": rec.path,
                      "size": rec.size, "sha256": rec.sha256, "n_events": rec.n_events,
                      "info": _encode(rec.info)})
    meta = {"format": _FORMAT, "format_version": _VERSION, "config_sha256": config_sha256,
            "hists": hists, "cutflows": cutflows, "totals": totals, "files": files,
            "seconds": {k: float(v) for k, v in partial.seconds.items()}}
    arrays["meta"] = np.array(json.dumps(meta))
    out = Path(folder) / PARTIAL_FILE
    buf = io.BytesIO()
    np.savez_compressed(buf, **arrays)  # type: ignore[arg-type]
    atomic_write_bytes(out, buf.getvalue())
    return out


# --------------------------------------------------------------------------- reading

def load_partial(folder: str | os.PathLike[str],
                 specs: Mapping[str, HistSpec]) -> tuple[PartialResult, str]:
    """Read ``folder/partial.npz`` back: the partial result and the sha256 of the config that
    made it. ``specs`` gives the histogram spec of each accumulator name."""
    path = Path(folder) / PARTIAL_FILE
    if not path.is_file():
        raise ResultsError(f"{folder}: no {PARTIAL_FILE} (written by 'evtkin run' since "
                           "the merge was added): this folder cannot be merged")
    try:
        data = np.load(path, allow_pickle=False)
        meta = json.loads(str(data["meta"]))
    except (OSError, ValueError, KeyError) as exc:
        raise ResultsError(f"{path}: not a readable partial-result file: {exc}") from None
    if meta.get("format") != _FORMAT or meta.get("format_version") != _VERSION:
        raise ResultsError(f"{path}: expected {_FORMAT} version {_VERSION}, got "
                           f"{meta.get('format')} version {meta.get('format_version')}")
    where = str(path)
    out = PartialResult()
    for k, h in enumerate(meta["hists"]):
        s, name, i, pid = h["key"]
        spec = specs.get(name)
        if spec is None:
            raise ResultsError(f"{path}: histogram {name!r} is not in the config")
        w = data[f"h{k}_w"]
        acc = HistAccumulator(spec, tuple(h["variations"]), int(h["entries"]),
                              np.array(w), np.array(data[f"h{k}_w2"]))
        if f"h{k}_n" in data and hasattr(acc, "counts"):
            acc.counts = np.array(data[f"h{k}_n"])
        out.hists[(str(s), str(name), int(i), int(pid))] = acc
    for k, key in enumerate(meta["cutflows"]):
        s, i, pid = key
        out.cutflows[(str(s), int(i), int(pid))] = Cutflow(
            np.array(data[f"c{k}_n"]), np.array(data[f"c{k}_w"]), np.array(data[f"c{k}_w2"]))
    for k, t in enumerate(meta["totals"]):
        s, i, pid = t["key"]
        out.totals[(str(s), int(i), int(pid))] = ProcessTotals(
            int(t["n_events"]), float(t["sum_w"]), float(t["sum_w2"]), float(t["sum_abs_w"]),
            int(t["n_negative"]), np.array(data[f"t{k}_var"]))
    for f in meta["files"]:
        rec = FileRecord(str(f["sample"]), int(f["index"]), str(f["path"]), int(f["size"]),
                         f["sha256"], int(f["n_events"]), _decode(f["info"], where))
        out.files[(rec.sample, rec.index)] = rec
    out.seconds = {str(k): float(v) for k, v in meta.get("seconds", {}).items()}
    return out, str(meta["config_sha256"])
