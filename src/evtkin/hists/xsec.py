"""Cross-section bookkeeping: from a file's declared run information and its weight totals to a
per-process factor ``f_p`` such that the per-event weight ``w_i = f_p · XWGTUP_i`` sums to σ in pb.

The weighting switch IDWTUP is interpreted as the Les Houches accord defines it (hep-ph/0109068;
summary and the caveats of real files in REFERENCES §1.4):

* ``±1``, ``±4``: the mean of XWGTUP estimates σ → ``f = 1/N`` (N = all events of the sample).
* ``±2``: XSECUP(p) is the cross section of process p, XWGTUP only relative weights within p →
  ``f_p = XSECUP(p) / Σ_{i∈p} XWGTUP_i``.
* ``±3``: unweighted events, σ = Σ_p XSECUP(p). We normalise by the **signed** sum of weights,
  ``f = σ / Σ_i XWGTUP_i``, so that Σw = σ exactly whatever constant |XWGTUP| the file uses (1, σ/N
  or σ): the declared σ is the net cross section. (``mode3_norm="count"`` instead uses
  ``f = σ / (N·mean|XWGTUP|)``, which makes Σw = σ·(n₊ − n₋)/N.)

Variation weights are in the units of XWGTUP and get the same factor (LHEF 3.0, REFERENCES §1.8).

When a file declares ``<xsecinfo totxsec>`` (or only XSECUP) the result is compared with it; a
mismatch beyond the stated errors is written to the log and to ``warnings`` together with which
other convention would match (``convention=`` lets the user choose it). ``override_pb`` rescales
everything to a user cross section.

Several files of one sample (:func:`combine_files`): the files' σ estimates are combined with
weights ``α_f``. Default ``"events"``: ``α_f = N_f / Σ N`` — for IDWTUP ±1/±4 this is exactly the
pooled mean over all events, i.e. what the accord implies for one long run; identical files give
back the single-file result. ``"inverse_variance"``: ``α_f ∝ 1/err_f²`` with each file's stated
error (falls back to events when an error is missing or zero). For the XSECUP-based modes (±2, ±3)
every file then receives the share ``N_f/N`` of the combined σ, so that a sample split into files
with different declared σ and event counts equals one file with all events that declares the
combined σ.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

__all__ = [
    "FileTotals",
    "ProcessDecl",
    "RunDecl",
    "XsecResult",
    "combine_files",
    "effective_entries",
    "normalisation_factors",
]

Convention = Literal["standard", "mean", "sum", "xsecup"]


@dataclass(frozen=True)
class ProcessDecl:
    """One ``<init>`` process line: LPRUP id, XSECUP and XERRUP in pb, XMAXUP."""

    id: int
    xsec_pb: float
    xerr_pb: float = 0.0
    xmax: float = 0.0


@dataclass(frozen=True)
class RunDecl:
    """What a file declares about normalisation: IDWTUP, processes, ``<xsecinfo totxsec>``."""

    idwtup: int
    processes: tuple[ProcessDecl, ...]
    totxsec_pb: float | None = None
    source: str = ""

    @property
    def sum_xsecup(self) -> float:
        return float(sum(p.xsec_pb for p in self.processes))

    @property
    def sum_xerrup(self) -> float:
        return float(math.sqrt(sum(p.xerr_pb**2 for p in self.processes)))


@dataclass
class FileTotals:
    """Per-process event counts and sums of XWGTUP, XWGTUP² and |XWGTUP| (mergeable with ``+``)."""

    n_events: dict[int, int] = field(default_factory=dict)
    sum_w: dict[int, float] = field(default_factory=dict)
    sum_w2: dict[int, float] = field(default_factory=dict)
    sum_abs: dict[int, float] = field(default_factory=dict)
    n_negative: int = 0

    @classmethod
    def from_arrays(cls, process_id: Any, xwgtup: Any) -> FileTotals:
        """Totals of one chunk of events (vectorised)."""
        pid = np.asarray(process_id, dtype=np.int64).reshape(-1)
        w = np.asarray(xwgtup, dtype=np.float64).reshape(-1)
        if pid.size != w.size:
            raise ValueError(f"process ids ({pid.size}) and weights ({w.size}) differ in length")
        ids, inv = np.unique(pid, return_inverse=True)
        cnt = np.bincount(inv, minlength=ids.size)
        sw = np.bincount(inv, weights=w, minlength=ids.size)
        sw2 = np.bincount(inv, weights=w * w, minlength=ids.size)
        sa = np.bincount(inv, weights=np.abs(w), minlength=ids.size)
        return cls(
            {int(i): int(c) for i, c in zip(ids, cnt, strict=True)},
            {int(i): float(s) for i, s in zip(ids, sw, strict=True)},
            {int(i): float(s) for i, s in zip(ids, sw2, strict=True)},
            {int(i): float(s) for i, s in zip(ids, sa, strict=True)},
            int(np.count_nonzero(w < 0)),
        )

    def __add__(self, other: FileTotals) -> FileTotals:
        def add(a: dict[int, Any], b: dict[int, Any]) -> dict[int, Any]:
            out = dict(a)
            for k, v in b.items():
                out[k] = out.get(k, 0) + v
            return out

        return FileTotals(
            add(self.n_events, other.n_events), add(self.sum_w, other.sum_w),
            add(self.sum_w2, other.sum_w2), add(self.sum_abs, other.sum_abs),
            self.n_negative + other.n_negative,
        )

    @property
    def total_events(self) -> int:
        return int(sum(self.n_events.values()))

    @property
    def total_sum_w(self) -> float:
        return float(sum(self.sum_w.values()))

    @property
    def total_sum_abs(self) -> float:
        return float(sum(self.sum_abs.values()))


@dataclass
class XsecResult:
    """Per-process factors (``w = factor[process] · XWGTUP``) and what they imply."""

    factors: dict[int, float]
    sigma_pb: float
    sigma_err_pb: float
    n_events: int
    sum_w: float
    sum_w2: float
    n_eff: float
    mode: int
    convention: str
    declared_pb: float | None = None
    declared_err_pb: float | None = None
    log: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    file_factors: list[dict[int, float]] | None = None  # combine_files: one dict per file
    #: combine_files: per-file record (source, IDWTUP, N, Σ XWGTUP, declared σ, estimate, α_f)
    files: list[dict[str, Any]] = field(default_factory=list)

    def factor(self, process_id: int, file_index: int = 0) -> float:
        table = self.file_factors[file_index] if self.file_factors else self.factors
        try:
            return table[int(process_id)]
        except KeyError:
            raise KeyError(f"no normalisation factor for process id {process_id}") from None

    def event_weights(self, process_id: Any, xwgtup: Any, file_index: int = 0) -> np.ndarray:
        """Normalised weights ``factor[pid] · w`` (``w`` may be 2-D: variations as columns)."""
        table = self.file_factors[file_index] if self.file_factors else self.factors
        pid = np.asarray(process_id, dtype=np.int64).reshape(-1)
        ids = np.array(sorted(table), dtype=np.int64)
        vals = np.array([table[int(i)] for i in ids], dtype=np.float64)
        pos = np.searchsorted(ids, pid)
        pos = np.clip(pos, 0, max(ids.size - 1, 0))
        if ids.size == 0 or np.any(ids[pos] != pid):
            bad = sorted(set(pid.tolist()) - set(ids.tolist()))
            raise KeyError(f"events with undeclared process ids {bad[:5]}")
        f = vals[pos]
        w = np.asarray(xwgtup, dtype=np.float64)
        return w * (f if w.ndim == 1 else f[:, None])

    def to_dict(self) -> dict[str, Any]:
        return {
            "sigma_pb": self.sigma_pb,
            "sigma_err_pb": self.sigma_err_pb,
            "n_events": self.n_events,
            "sum_w": self.sum_w,
            "sum_w2": self.sum_w2,
            "n_eff": self.n_eff,
            "mode": self.mode,
            "convention": self.convention,
            "declared_totxsec_pb": self.declared_pb,
            "declared_err_pb": self.declared_err_pb,
            "factors": {str(k): v for k, v in self.factors.items()},
            "log": list(self.log),
            "warnings": list(self.warnings),
            "files": [dict(f) for f in self.files],
        }


def effective_entries(sum_w: float, sum_w2: float) -> float:
    """N_eff = (Σw)² / Σw² (REFERENCES §2.11); 0 for an empty sample."""
    return float(sum_w * sum_w / sum_w2) if sum_w2 > 0 else 0.0


def _factors_for(
    run: RunDecl, tot: FileTotals, convention: Convention, mode3_norm: str
) -> tuple[dict[int, float], str]:
    mode = abs(int(run.idwtup))
    n = tot.total_events
    ids = sorted({p.id for p in run.processes} | set(tot.n_events))
    conv = convention
    if conv == "standard":
        conv = {1: "mean", 4: "mean", 2: "xsecup", 3: "unweighted"}.get(mode, "")  # type: ignore[assignment]
        if not conv:
            raise ValueError(
                f"{run.source or 'file'}: IDWTUP = {run.idwtup} is not one of ±1, ±2, ±3, ±4"
            )
    if conv == "mean":
        if n == 0:
            return {i: 0.0 for i in ids}, "w = XWGTUP / N (no events)"
        return {i: 1.0 / n for i in ids}, f"w = XWGTUP / N with N = {n} (mean XWGTUP = σ)"
    if conv == "sum":
        return {i: 1.0 for i in ids}, "w = XWGTUP (Σ XWGTUP = σ)"
    if conv == "xsecup":
        xs = {p.id: p.xsec_pb for p in run.processes}
        out = {}
        for i in ids:
            s = tot.sum_w.get(i, 0.0)
            out[i] = xs.get(i, 0.0) / s if s != 0 else 0.0
        return out, "w = XWGTUP · XSECUP(p) / Σ_{i∈p} XWGTUP (per process)"
    # unweighted (±3)
    sigma = run.sum_xsecup
    if mode3_norm == "count":
        denom = tot.total_sum_abs
        text = "w = XWGTUP · Σ XSECUP / Σ|XWGTUP| (= sign · σ/N for constant |XWGTUP|)"
    else:
        denom = tot.total_sum_w
        text = "w = XWGTUP · Σ XSECUP / Σ XWGTUP (signed sum; Σw = σ exactly)"
    f = sigma / denom if denom != 0 else 0.0
    return {i: f for i in ids}, text


def _sigma_error(run: RunDecl, tot: FileTotals, factors: dict[int, float], conv: str) -> float:
    """Stated error: XERRUP for XSECUP-based modes, else the standard error of the mean weight."""
    if conv in ("xsecup", "unweighted"):
        return run.sum_xerrup
    n = tot.total_events
    if n < 2:
        return 0.0
    # w_i = f · x_i with one common factor in these conventions
    f = next(iter(factors.values()), 0.0)
    sx = tot.total_sum_w
    sx2 = float(sum(tot.sum_w2.values()))
    if conv == "mean":  # σ = mean(x): error = std(x)/sqrt(N)
        var = max(sx2 / n - (sx / n) ** 2, 0.0) * n / (n - 1)
        return math.sqrt(var / n)
    return abs(f) * math.sqrt(max(sx2 - sx * sx / n, 0.0) * n / (n - 1))  # "sum"


def normalisation_factors(
    run: RunDecl,
    totals: FileTotals,
    *,
    convention: Convention = "standard",
    override_pb: float | None = None,
    mode3_norm: Literal["sum", "count"] = "sum",
    rel_tolerance: float = 0.01,
) -> XsecResult:
    """Per-process factors for one file (or one sample read as one run); see the module doc."""
    log: list[str] = []
    warnings: list[str] = []
    src = run.source or "file"
    factors, text = _factors_for(run, totals, convention, mode3_norm)
    conv = convention if convention != "standard" else (
        {1: "mean", 4: "mean", 2: "xsecup", 3: "unweighted"}[abs(run.idwtup)]
    )
    log.append(f"{src}: IDWTUP = {run.idwtup}, NPRUP = {len(run.processes)}; {text}")
    if run.idwtup > 0 and totals.n_negative:
        warnings.append(
            f"{src}: IDWTUP = {run.idwtup} forbids negative weights but {totals.n_negative} "
            "events have XWGTUP < 0; signs are kept"
        )
    missing = sorted(set(totals.n_events) - {p.id for p in run.processes})
    if missing:
        warnings.append(f"{src}: events with process ids {missing} not declared in <init>")
    if conv == "xsecup":
        empty = [p.id for p in run.processes if totals.sum_w.get(p.id, 0.0) == 0.0]
        if empty:
            warnings.append(
                f"{src}: processes {empty} have no events (or Σ XWGTUP = 0); their XSECUP is lost"
            )
    sum_w = sum(factors.get(i, 0.0) * s for i, s in totals.sum_w.items())
    sum_w2 = sum(factors.get(i, 0.0) ** 2 * s for i, s in totals.sum_w2.items())
    sigma = float(sum_w)
    err = _sigma_error(run, totals, factors, conv)

    # cross-check against what the file declares
    declared = run.totxsec_pb if run.totxsec_pb else (
        run.sum_xsecup if run.processes and run.sum_xsecup != 0 else None
    )
    declared_err = run.sum_xerrup if declared is not None and run.processes else None
    if declared is None:
        log.append(f"{src}: the file declares no cross section (Σ XSECUP = 0, no "
                   "<xsecinfo totxsec>): no cross-check possible")
    if declared is not None and override_pb is None:
        tag = "<xsecinfo totxsec>" if run.totxsec_pb is not None else "Σ XSECUP"
        tol = 5.0 * math.hypot(err, declared_err or 0.0) + rel_tolerance * abs(declared)
        if abs(sigma - declared) > tol:
            alt = []
            n = totals.total_events
            cands = {"mean": totals.total_sum_w / n if n else 0.0, "sum": totals.total_sum_w}
            for name, val in cands.items():
                if name != conv and abs(val - declared) <= rel_tolerance * abs(declared) + tol:
                    alt.append(name)
            warnings.append(
                f"{src}: σ = {sigma:.6g} pb from IDWTUP = {run.idwtup} disagrees with {tag} = "
                f"{declared:.6g} pb"
                + (f"; convention {alt[0]!r} would match (set it explicitly)" if alt else "")
            )
        else:
            log.append(f"{src}: σ = {sigma:.6g} pb agrees with {tag} = {declared:.6g} pb")
    if override_pb is not None:
        if sigma == 0:
            raise ValueError(f"{src}: cannot override σ: the sum of weights is zero")
        scale = float(override_pb) / sigma
        factors = {i: f * scale for i, f in factors.items()}
        log.append(f"{src}: σ overridden by the user: {override_pb:.6g} pb (was {sigma:.6g} pb)")
        sum_w, sum_w2, sigma, err = float(override_pb), sum_w2 * scale**2, float(override_pb), 0.0
    neff = effective_entries(sum_w, sum_w2)
    log.append(f"{src}: N = {totals.total_events}, N_eff = (Σw)²/Σw² = {neff:.6g}")
    return XsecResult(
        factors=factors, sigma_pb=sigma, sigma_err_pb=err, n_events=totals.total_events,
        sum_w=float(sum_w), sum_w2=float(sum_w2), n_eff=neff, mode=int(run.idwtup),
        convention=conv, declared_pb=declared, declared_err_pb=declared_err, log=log,
        warnings=warnings,
    )


def combine_files(
    files: Sequence[tuple[RunDecl, FileTotals]] | Iterable[tuple[RunDecl, FileTotals]],
    *,
    weighting: Literal["events", "inverse_variance"] = "events",
    convention: Convention = "standard",
    override_pb: float | None = None,
    mode3_norm: Literal["sum", "count"] = "sum",
) -> XsecResult:
    """Combine several files of one sample into per-file factors (``file_factors[f][process]``).

    Each file's σ estimate is weighted by ``α_f`` (event counts, or inverse variance of the stated
    errors). Weighted conventions (IDWTUP ±1/±4: pooled mean; "sum") scale each file by ``α_f``.
    XSECUP-based conventions (±2 per process, ±3) give every file the share ``N_f/N`` of the
    combined σ, so that unweighted events of all files get the same weight — the result equals a
    single file holding all events and declaring the combined σ.
    """
    parts = list(files)
    if not parts:
        raise ValueError("combine_files: no files given")
    pre_log: list[str] = []
    undeclared = all(r.sum_xsecup == 0 and not r.totxsec_pb for r, _t in parts)
    if convention == "standard":
        uses_xsecup = all(abs(int(r.idwtup)) in (2, 3) for r, _t in parts)
    else:
        uses_xsecup = convention == "xsecup"
    if undeclared and uses_xsecup:
        srcs = ", ".join(r.source or "file" for r, _t in parts)
        if override_pb is None:
            raise ValueError(
                f"{srcs}: IDWTUP = {parts[0][0].idwtup} takes σ from XSECUP, but no cross "
                "section is declared (XSECUP = 0, no <xsecinfo totxsec>); give the sample's "
                "cross_section_pb")
        convention = "mean"  # shape from XWGTUP / N, scaled to the user's σ below
        pre_log.append(f"{srcs}: no declared cross section; weights XWGTUP/N scaled to the "
                       "user's σ")
    per = [
        normalisation_factors(r, t, convention=convention, mode3_norm=mode3_norm)
        for r, t in parts
    ]
    convs = {p.convention for p in per}
    if len(convs) > 1:
        raise ValueError(f"combine_files: files use different weighting conventions {convs}")
    conv = convs.pop()
    n = np.array([p.n_events for p in per], dtype=np.float64)
    errs = np.array([p.sigma_err_pb for p in per], dtype=np.float64)
    log = pre_log + [line for p in per for line in p.log]
    warnings = [w for p in per for w in p.warnings]
    if weighting == "inverse_variance" and np.all(errs > 0):
        alpha = (1.0 / errs**2) / np.sum(1.0 / errs**2)
        log.append("files combined with weights ∝ 1/err_f² (inverse variance of stated errors)")
    else:
        if weighting == "inverse_variance":
            log.append("a file has no stated error: files combined by event counts instead")
        alpha = n / n.sum() if n.sum() > 0 else np.full(len(per), 1.0 / len(per))
        log.append("files combined with weights α_f = N_f / Σ N (event counts)")
    err = float(math.sqrt(np.sum((alpha * errs) ** 2)))

    file_factors: list[dict[int, float]] = []
    if conv in ("mean", "sum"):
        file_factors = [{i: a * f for i, f in p.factors.items()}
                        for a, p in zip(alpha, per, strict=True)]
    else:
        runs = [r for r, _t in parts]
        tots = [t for _r, t in parts]
        pids = sorted({i for p in per for i in p.factors})
        if conv == "unweighted":
            sig = float(sum(a * r.sum_xsecup for a, r in zip(alpha, runs, strict=True)))
            ntot = float(n.sum())
            for t in tots:
                den = t.total_sum_abs if mode3_norm == "count" else t.total_sum_w
                f = sig * (t.total_events / ntot) / den if den and ntot else 0.0
                file_factors.append({i: f for i in pids})
        else:  # xsecup, per process
            sig_p = {
                i: float(sum(a * next((q.xsec_pb for q in r.processes if q.id == i), 0.0)
                             for a, r in zip(alpha, runs, strict=True)))
                for i in pids
            }
            n_p = {i: sum(t.n_events.get(i, 0) for t in tots) for i in pids}
            for t in tots:
                ff = {}
                for i in pids:
                    s = t.sum_w.get(i, 0.0)
                    ff[i] = sig_p[i] * t.n_events.get(i, 0) / n_p[i] / s if s and n_p[i] else 0.0
                file_factors.append(ff)
        log.append("XSECUP-based weighting: each file gets the share N_f/N of the combined σ")

    def totals_with(ffs: list[dict[int, float]]) -> tuple[float, float]:
        sw = sum(ff.get(i, 0.0) * v for ff, t in zip(ffs, (t for _r, t in parts), strict=True)
                 for i, v in t.sum_w.items())
        sw2 = sum(ff.get(i, 0.0) ** 2 * v
                  for ff, t in zip(ffs, (t for _r, t in parts), strict=True)
                  for i, v in t.sum_w2.items())
        return float(sw), float(sw2)

    sum_w, sum_w2 = totals_with(file_factors)
    sigma = sum_w
    if override_pb is not None:
        if sigma == 0:
            raise ValueError("cannot override σ: the sum of weights is zero")
        scale = float(override_pb) / sigma
        file_factors = [{i: f * scale for i, f in ff.items()} for ff in file_factors]
        log.append(f"σ overridden by the user: {override_pb:.6g} pb (was {sigma:.6g} pb)")
        sum_w, sum_w2 = totals_with(file_factors)
        sigma, err = float(override_pb), 0.0
    decl = [p.declared_pb for p in per]
    decl_err = [p.declared_err_pb for p in per]
    declared_err = (
        float(math.sqrt(sum((a * e) ** 2 for a, e in zip(alpha, decl_err, strict=True))))
        if all(e is not None for e in decl_err) and all(d is not None for d in decl) else None
    )
    files_info = [
        {"source": r.source, "idwtup": int(r.idwtup), "n_processes": len(r.processes),
         "n_events": t.total_events, "n_negative": t.n_negative,
         "sum_xwgtup": t.total_sum_w, "sum_xwgtup2": float(sum(t.sum_w2.values())),
         "sum_xsecup_pb": r.sum_xsecup, "xerrup_pb": r.sum_xerrup, "totxsec_pb": r.totxsec_pb,
         "sigma_pb": p.sigma_pb, "sigma_err_pb": p.sigma_err_pb, "weight_in_combination": float(a)}
        for (r, t), p, a in zip(parts, per, alpha, strict=True)
    ]
    declared = (
        float(sum(a * d for a, d in zip(alpha, decl, strict=True)))
        if all(d is not None for d in decl) else None
    )
    modes = {p.mode for p in per}
    neff = effective_entries(sum_w, sum_w2)
    log.append(f"{len(parts)} files: σ = {sigma:.6g} pb, N = {int(n.sum())}, N_eff = {neff:.6g}")
    return XsecResult(
        factors=file_factors[0] if len(file_factors) == 1 else {},
        sigma_pb=sigma, sigma_err_pb=err, n_events=int(n.sum()), sum_w=sum_w, sum_w2=sum_w2,
        n_eff=neff, mode=modes.pop() if len(modes) == 1 else 0, convention=conv,
        declared_pb=declared, declared_err_pb=declared_err, log=log, warnings=warnings,
        file_factors=file_factors, files=files_info,
    )
