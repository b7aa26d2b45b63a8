"""Two-column self-check: how much a second column of another polarity adds, on the user's own library.

``matcher evaluate --class A --second-class B`` takes the compounds the library
lists on both classes (a measured entry on each) and simulates crowded
two-column runs of one sample (seeded, so a seed gives the same numbers):

* **sample** – each run draws a share (``sample_share``) of those compounds;
  of the drawn ones a share (``unlisted_share``) is taken out of the library
  for that run (all its entries, on every class), so they are *unlisted
  peaks* whose indices on both columns follow the same polarity pattern as the
  listed ones, as unlisted isomers in a real oil do;
* **indices** – each peak's index on each column is the compound's entry
  there plus Gaussian scatter of the entry's own (predictive) spread plus a
  run scatter (``noise`` units on both columns, else the class's default
  measurement scatter, the one ``matcher screen`` assumes before it
  estimates its own), plus ``offset`` on both;
* **areas** – one injection split to both columns: an amount per compound
  (log-normal, ``AMOUNT_SPREAD``), the second column's areas a common split
  factor (log-uniform in :data:`SPLIT_RANGE`) times the amount, each column's
  area with its own per-peak scatter (log-normal, ``area_scatter``);
* **second run** – its rows shuffled and numbered in the shuffled order, so
  neither the order nor the ids say which peak is which;
* each run is screened twice with :func:`matcher.identify.screening.screen`,
  on the first column alone and with the second run (``second=``), and the
  two answers compared.

Reported (pooled over the runs): ``top1`` (listed peaks whose first candidate
is their compound), ``ece`` (expected calibration error of the top
probability over all peaks, ten equal bins, as :func:`evaluation.evaluate_crowded`
measures it) with its ``reliability`` table, ``confident_calls`` and
``confident_precision`` (calls at p ≥ :data:`evaluation.CONFIDENT_AT`),
``mean_top_probability_unlisted``, each for one and for two columns; for two
columns also ``pairing_accuracy`` (share of the first run's peaks whose
``second_peak`` is their own peak on the second column), ``paired`` (share
paired at all) and how often a wrong first candidate carries the flag
``second-column-disagrees`` (``wrong_top_flagged``) against how often a right
one does (``right_top_flagged``).

Every compound of the sample gives a peak on both columns (no co-elution, no
peak lost below detection); the run is not shifted unless ``offset`` says so.
Real runs are harder; this measures what the second column can add at best
on the library's own spacing.

>>> from matcher.store.snapshot import CompoundTable, build_snapshot
>>> comp = CompoundTable.from_records([{"id": i + 1, "name": f"c{i}"} for i in range(30)])
>>> ids = np.r_[np.arange(1, 31), np.arange(1, 31)]
>>> cls = np.array(["nonpolar"] * 30 + ["polar"] * 30)
>>> ri = np.r_[900.0 + 9.0 * np.arange(30), 1100.0 + 9.0 * ((7 * np.arange(30)) % 30)]
>>> r = evaluate_two_columns(build_snapshot(comp, ids, cls, ri), "nonpolar", "polar", runs=2)
>>> r["compounds_on_both"], r["runs"], r["peaks"] == r["listed_peaks"] + r["unlisted_peaks"]
(30, 2, True)
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from matcher.classes import check_class
from matcher.errors import MatcherError
from matcher.identify.evaluation import CONFIDENT_AT, SEED, _ece
from matcher.store.snapshot import ClassEntries, LibrarySnapshot

#: Simulated runs (the default of ``matcher evaluate --second-class``).
RUNS = 20
#: Share of the compounds on both classes drawn into each run's sample.
SAMPLE_SHARE = 0.8
#: Share of the drawn compounds taken out of the library for that run (the unlisted peaks).
UNLISTED_SHARE = 0.3
#: Most peaks per simulated run (a seeded draw of the compounds beyond this).
MAX_SAMPLE = 300
#: σ of ln(amount) over a sample's compounds (an assumption: amounts spanning about two decades).
AMOUNT_SPREAD = 1.0
#: σ of ln(area) per peak and column around amount × split (an assumption: integration and response scatter).
AREA_SCATTER = 0.15
#: Range of the common split factor area_B / area_A of one injection (drawn log-uniform per run; an assumption).
SPLIT_RANGE = (0.5, 2.0)
#: The flag a wrong first candidate should carry in a two-column screen (matcher.identify.flags).
DISAGREE_FLAG = "second-column-disagrees"


def compounds_on_both(snapshot: LibrarySnapshot, first: str, second: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Compound rows with a measured entry on both classes, and each one's (index, spread) per class.

    Returns (rows, [index on first, index on second] shape (n, 2), [spread, spread] shape (n, 2)).
    """
    from matcher.identify.two_columns import per_compound

    n = len(snapshot.compounds)
    ri_a, sd_a = per_compound(snapshot.entries(first), n)
    ri_b, sd_b = per_compound(snapshot.entries(second), n)
    rows = np.flatnonzero(np.isfinite(ri_a) & np.isfinite(ri_b))
    return rows, np.c_[ri_a[rows], ri_b[rows]], np.c_[sd_a[rows], sd_b[rows]]


def _without(snapshot: LibrarySnapshot, classes: tuple[str, str], gone: np.ndarray) -> LibrarySnapshot:
    """The library of the two classes with the compounds ``gone`` taken out (all their entries)."""
    kept = {}
    for cls in classes:
        e = snapshot.entries(cls)
        keep = ~np.isin(e.compound, gone)
        kept[cls] = ClassEntries(e.phase_class, e.ri[keep], e.sd[keep], e.n[keep], e.compound[keep], e.predicted[keep])
    return LibrarySnapshot(snapshot.compounds, kept, source=snapshot.source, revision=snapshot.revision)


def _reliability(prob: np.ndarray, correct: np.ndarray, bins: int = 10) -> list[dict]:
    """Per non-empty bin of the top probability: its range, peak count, mean probability and hit rate."""
    from matcher.identify.evaluation import probability_bins

    return [{"from": round(lo, 2), "to": round(hi, 2), "peaks": n, "mean_probability": round(m, 4),
             "hit_rate": round(h, 4)} for lo, hi, n, m, h in probability_bins(prob, correct, bins)]


def _overconfidence(prob: np.ndarray, correct: np.ndarray, bins: int = 10) -> float:
    """The over-confident part of the ECE: Σ over bins of share × max(0, mean probability − hit rate)."""
    from matcher.identify.evaluation import probability_bins

    return float(sum(n / len(prob) * max(0.0, m - h) for _, _, n, m, h in probability_bins(prob, correct, bins)))


def _tops(table, ids: np.ndarray) -> dict[str, np.ndarray]:
    """Per peak id (in the order of ``ids``): first candidate's name, probability, flags and paired second peak."""
    import pandas as pd

    top = table[pd.to_numeric(table["rank"], errors="coerce") == 1]
    top = top.drop_duplicates("peak")
    top = top.set_index(top["peak"].astype(str))
    first = table.drop_duplicates("peak")
    first = first.set_index(first["peak"].astype(str))
    key = [str(i) for i in ids]
    name = top["name"].reindex(key)
    out = {
        "has": name.notna().to_numpy(),
        "name": name.fillna("").astype(str).to_numpy(),
        "probability": pd.to_numeric(top["probability"].reindex(key), errors="coerce").fillna(0.0).to_numpy(float),
        "flags": top["flags"].reindex(key).fillna("").astype(str).to_numpy(),
    }
    if "second_peak" in first.columns:
        out["second_peak"] = first["second_peak"].reindex(key).fillna("").astype(str).to_numpy()
    return out


def _rates(prob: np.ndarray, right: np.ndarray, listed: np.ndarray) -> dict:
    conf = prob >= CONFIDENT_AT
    return {
        "top1": round(float(right[listed].mean()), 4) if listed.any() else None,
        "ece": round(_ece(prob, right), 4),
        "overconfidence": round(_overconfidence(prob, right), 4),
        "confident_calls": int(conf.sum()),
        "confident_precision": round(float(right[conf].mean()), 4) if conf.any() else None,
        "mean_top_probability_unlisted": round(float(prob[~listed].mean()), 4) if (~listed).any() else None,
        "reliability": _reliability(prob, right),
    }


def evaluate_two_columns(snapshot: LibrarySnapshot, phase_class: str, second_class: str, *, runs: int | None = None,
                         noise: float | None = None, offset: float = 0.0, window: float | None = None,
                         seed: int | None = None, sample_share: float = SAMPLE_SHARE, unlisted_share: float = UNLISTED_SHARE,
                         area_scatter: float = AREA_SCATTER) -> dict:
    """Simulated crowded two-column runs screened on one column and on two (see the module doc)."""
    from matcher.identify.evidence import DEFAULT_MEASUREMENT_SD
    from matcher.identify.screening import screen

    a, b = check_class(phase_class), check_class(second_class)
    runs = RUNS if runs is None else int(runs)
    seed = SEED if seed is None else int(seed)
    if a == b:
        raise MatcherError(f"the second column's class must differ from the first: both are {a}")
    rows, centre, spread = compounds_on_both(snapshot, a, b)
    scatter = np.array([DEFAULT_MEASUREMENT_SD[a], DEFAULT_MEASUREMENT_SD[b]]) if noise is None \
        else np.full(2, float(noise))
    out: dict = {
        "mode": "two-columns", "class": a, "second_class": b, "compounds_on_both": int(len(rows)),
        "seed": int(seed),
        "settings": {"runs": int(runs), "sample_share": sample_share, "unlisted_share": unlisted_share,
                     "run_scatter": {a: float(scatter[0]), b: float(scatter[1])}, "offset": float(offset),
                     "area_scatter": area_scatter, "amount_spread": AMOUNT_SPREAD, "split_range": list(SPLIT_RANGE),
                     "window": window, "confident_at": CONFIDENT_AT},
        "library": {"location": snapshot.source, "revision": snapshot.revision},
    }
    if len(rows) < 4:
        out["notice"] = f"fewer than four compounds listed on both {a} and {b}: nothing to evaluate"
        return out
    import pandas as pd

    rng = np.random.default_rng(seed)
    names = np.asarray(snapshot.compounds.name, dtype=object)
    n_sample = int(min(max(round(sample_share * len(rows)), 2), MAX_SAMPLE))
    n_gone = int(round(unlisted_share * n_sample))
    collected: dict[str, list] = {k: [] for k in ("listed", "right1", "p1", "has2", "right2", "p2", "paired", "pair_ok",
                                                  "disagree")}
    lo, hi = np.log(SPLIT_RANGE[0]), np.log(SPLIT_RANGE[1])
    for _ in range(int(runs)):
        pick = np.sort(rng.choice(len(rows), n_sample, replace=False))
        gone = np.zeros(n_sample, dtype=bool)
        gone[rng.choice(n_sample, n_gone, replace=False)] = True
        comp = rows[pick]
        x = centre[pick] + rng.normal(0.0, 1.0, (n_sample, 2)) * spread[pick] \
            + rng.normal(0.0, 1.0, (n_sample, 2)) * scatter + offset
        amount = np.exp(rng.normal(0.0, AMOUNT_SPREAD, n_sample))
        split = np.exp(rng.uniform(lo, hi))
        area_a = amount * np.exp(rng.normal(0.0, area_scatter, n_sample))
        area_b = split * amount * np.exp(rng.normal(0.0, area_scatter, n_sample))
        shuffle = rng.permutation(n_sample)
        order_a = np.argsort(x[:, 0], kind="stable")
        ids_a = np.empty(n_sample, dtype=object)
        ids_a[order_a] = [f"a{k + 1}" for k in range(n_sample)]
        ids_b = np.empty(n_sample, dtype=object)
        ids_b[shuffle] = [f"b{k + 1}" for k in range(n_sample)]
        # retention times are invented (index / 60), only so each table has the usual columns
        first = pd.DataFrame({"peak": ids_a[order_a], "rt": x[order_a, 0] / 60.0, "ri": x[order_a, 0],
                              "area": area_a[order_a]})
        second = pd.DataFrame({"peak": ids_b[shuffle], "rt": x[shuffle, 1] / 60.0, "ri": x[shuffle, 1],
                               "area": area_b[shuffle]})
        lib = _without(snapshot, (a, b), comp[gone])
        one = _tops(screen(first, a, snapshot=lib, window=window).runs[0].table, ids_a)
        two = _tops(screen(first, a, snapshot=lib, window=window, second=second, second_class=b).runs[0].table, ids_a)
        truth = names[comp]
        listed = ~gone
        right1 = one["has"] & listed & (one["name"] == truth)
        right2 = two["has"] & listed & (two["name"] == truth)
        collected["listed"].append(listed)
        collected["right1"].append(right1)
        collected["p1"].append(one["probability"])
        collected["has2"].append(two["has"])
        collected["right2"].append(right2)
        collected["p2"].append(two["probability"])
        partner = two.get("second_peak", np.full(n_sample, "", dtype=object))
        collected["paired"].append(partner != "")
        collected["pair_ok"].append(partner == ids_b.astype(str))
        collected["disagree"].append(np.array([DISAGREE_FLAG in f.split(";") for f in two["flags"]], dtype=bool)
                                     & two["has"])
    c = {k: np.concatenate(v) for k, v in collected.items()}
    listed = c["listed"]
    wrong2 = c["has2"] & ~c["right2"]
    out.update({
        "runs": int(runs),
        "peaks": int(len(listed)),
        "listed_peaks": int(listed.sum()),
        "unlisted_peaks": int((~listed).sum()),
        "one_column": _rates(c["p1"], c["right1"], listed),
        "two_columns": _rates(c["p2"], c["right2"], listed),
    })
    out["two_columns"].update({
        "pairing_accuracy": round(float(c["pair_ok"].mean()), 4),
        "pairing_accuracy_listed": round(float(c["pair_ok"][listed].mean()), 4) if listed.any() else None,
        "pairing_accuracy_unlisted": round(float(c["pair_ok"][~listed].mean()), 4) if (~listed).any() else None,
        "paired": round(float(c["paired"].mean()), 4),
        "wrong_top": int(wrong2.sum()),
        "wrong_top_flagged": round(float(c["disagree"][wrong2].mean()), 4) if wrong2.any() else None,
        "right_top": int(c["right2"].sum()),
        "right_top_flagged": round(float(c["disagree"][c["right2"]].mean()), 4) if c["right2"].any() else None,
    })
    return out


@dataclass
class TwoColumnEvaluation:
    """What a second column adds on this library (``matcher evaluate --second-class``); rates are fractions 0-1.

    ``one_column`` and ``two_columns`` hold the rates of :func:`evaluate_two_columns` (see the module doc);
    ``notice`` says why nothing was measured (fewer than four compounds on both classes).
    """

    phase_class: str
    second_class: str
    compounds_on_both: int
    seed: int
    settings: dict[str, Any] = field(default_factory=dict)
    library: dict[str, Any] = field(default_factory=dict)
    runs: int = 0
    peaks: int = 0
    listed_peaks: int = 0
    unlisted_peaks: int = 0
    one_column: dict[str, Any] | None = None
    two_columns: dict[str, Any] | None = None
    notice: str | None = None

    @classmethod
    def from_dict(cls, doc: dict) -> "TwoColumnEvaluation":
        """From the document :func:`evaluate_two_columns` returns."""
        rest = {k: v for k, v in doc.items() if k not in ("mode", "class")}
        return cls(phase_class=doc["class"], **rest)

    def to_dict(self) -> dict[str, Any]:
        """The document ``matcher evaluate --class A --second-class B --json`` prints (docs/formats.md)."""
        out: dict[str, Any] = {"mode": "two-columns", "class": self.phase_class}
        out.update({k: getattr(self, k) for k in self.__dataclass_fields__ if k != "phase_class"})
        if out["notice"] is None:
            del out["notice"]
        return out
