"""Finding the n-alkanes of a ladder run among its detected peaks.

:func:`find_alkanes` takes detected peaks (apex times, heights, spectra) and
returns which peaks are the ladder's alkanes and their carbon numbers:

1. **Alkane-like spectra**: the m/z 57/71/85 series (see
   :func:`matcher.signal.mass_spectra.alkane_evidence`).
2. **Regular spacing**: an alkane-like peak that makes an interval shorter
   than half of both neighbouring intervals is an intruder (a branched
   alkane or another hydrocarbon in the mixture); of the two peaks of that
   interval, the smaller is dropped, and the check repeats.
3. **Carbon numbers**: consecutive alkanes differ by one carbon, or by
   ``round(r)`` where an interval is ``r`` ≥ 1.7 times the median of its
   neighbours (a member missing from the mixture). The molecular ions
   (14n + 2) that are visible fix the numbering: the most common difference
   between their carbon numbers and the running position. At least two
   peaks must agree and they must be the majority of those with a molecular
   ion; otherwise ``carbons=(first, last)`` (``--carbons FIRST-LAST``) is
   needed. With it, the alkane-like peaks are numbered first to last in time
   order (when more are found, the largest ones are kept and a warning
   says so), and any molecular ion that disagrees is reported.

The thresholds (1/2, 1.7) are our own choice. The result is then checked
like any ladder (:func:`matcher.retention.ladder.check_ladder`).

>>> t = np.array([100., 160, 175, 220, 280, 340])              # invented; 175 s is an intruder
>>> spectra = [(np.array([43., 57, 71, 85, 14 * n + 2]), np.array([80., 100, 50, 30, 2]))
...            for n in (8, 9, 9, 10, 11, 12)]
>>> found = find_alkanes(t, np.array([5., 5, 1, 5, 5, 5]), spectra)
>>> found.peaks.tolist(), found.carbons.tolist()
([0, 1, 3, 4, 5], [8, 9, 10, 11, 12])
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from matcher.errors import MatcherError
from matcher.signal.mass_spectra import alkane_evidence

#: An interval shorter than this fraction of both neighbours marks an intruder.
INTRUDER_RATIO = 0.5
#: An interval at least this many times its neighbours' median skips a member.
SKIP_RATIO = 1.7


@dataclass
class FoundLadder:
    """The alkanes found: positions among the detected peaks, apex times, carbon numbers and how each was known."""

    peaks: np.ndarray            # indices into the detected peaks
    rt_s: np.ndarray
    carbons: np.ndarray          # int
    carbons_from: list[str]      # "molecular ion" or "position" (numbered from its neighbours) or "--carbons"
    mol_ion_carbons: list        # carbon number read from the molecular ion, or None
    candidates: int              # alkane-like peaks before the spacing check
    warnings: list[str] = field(default_factory=list)


def _fmt(ts) -> str:
    return ", ".join(f"{v / 60:.2f}" for v in ts)


def find_alkanes(rt_s, height, spectra, *, carbons: tuple[int, int] | None = None) -> FoundLadder:
    """The ladder's alkanes among detected peaks; see the module doc. Raises :class:`MatcherError`."""
    rt_s = np.asarray(rt_s, dtype=np.float64)
    height = np.asarray(height, dtype=np.float64)
    ev = [alkane_evidence(mz, y) for mz, y in spectra]
    cand = [k for k in np.argsort(rt_s, kind="stable") if ev[k][0]]
    n_cand = len(cand)
    warnings: list[str] = []
    if n_cand < 2:
        raise MatcherError(f"found {n_cand} peak(s) with an n-alkane spectrum (m/z 57/71/85 series) among "
                           f"{len(rt_s)} peaks: not an n-alkane ladder run, or the alkanes are too small")
    dropped = []
    while len(cand) >= 3:
        d = np.diff(rt_s[cand])
        prev = np.r_[np.inf, d[:-1]]
        nxt = np.r_[d[1:], np.inf]
        short = np.flatnonzero((d < INTRUDER_RATIO * prev) & (d < INTRUDER_RATIO * nxt))
        if not short.size:
            break
        i = int(short[np.argmin(d[short] / np.minimum(prev[short], nxt[short]))])
        a, b = cand[i], cand[i + 1]
        drop = a if height[a] < height[b] else b
        dropped.append(drop)
        cand.remove(drop)
    if dropped:
        warnings.append(f"{len(dropped)} alkane-like peak(s) at {_fmt(rt_s[dropped])} min broke the ladder's "
                        "regular spacing and were left out")
    cand = np.asarray(cand, dtype=np.int64)
    m_carbons = [ev[k][1] for k in cand]

    if carbons is not None:
        first, last = int(carbons[0]), int(carbons[1])
        want = last - first + 1
        if len(cand) < want:
            raise MatcherError(f"--carbons {first}-{last} names {want} alkanes, but {len(cand)} alkane-like peaks "
                               f"were found (at {_fmt(rt_s[cand])} min)")
        if len(cand) > want:
            keep = np.sort(cand[np.argsort(height[cand])[::-1][:want]])
            warnings.append(f"{len(cand)} alkane-like peaks for {want} alkanes: the {want} largest were taken")
            m_carbons = [ev[k][1] for k in keep]
            cand = keep
        assigned = np.arange(first, last + 1)
        for k, (n_m, n_a) in enumerate(zip(m_carbons, assigned)):
            if n_m is not None and n_m != n_a:
                warnings.append(f"the peak at {rt_s[cand[k]] / 60:.2f} min is numbered C{n_a} by --carbons but its "
                                f"molecular ion says C{n_m}")
        source = ["--carbons"] * len(cand)
    else:
        d = np.diff(rt_s[cand])
        steps = np.ones(len(d), dtype=np.int64)
        for i in range(len(d)):
            near = [d[j] for j in range(max(0, i - 2), min(len(d), i + 3)) if j != i]
            if near:
                r = d[i] / float(np.median(near))
                if r >= SKIP_RATIO:
                    steps[i] = int(round(r))
        pos = np.r_[0, np.cumsum(steps)]
        known = [(int(m) - int(p)) for m, p in zip(m_carbons, pos) if m is not None]
        if not known:
            raise MatcherError(f"found {len(cand)} n-alkane peaks (at {_fmt(rt_s[cand])} min) but no molecular ion "
                               "(14n + 2) is visible: give the carbon numbers with --carbons FIRST-LAST")
        offset, votes = Counter(known).most_common(1)[0]
        if votes < 2 or votes * 2 <= len(known):
            raise MatcherError(f"the molecular ions of the {len(cand)} n-alkane peaks do not agree on a numbering "
                               f"({len(known)} visible, {votes} agree): give --carbons FIRST-LAST")
        assigned = pos + offset
        if assigned[0] < 1:
            raise MatcherError("the molecular ions give a carbon number below 1: give --carbons FIRST-LAST")
        bad = [k for k, m in enumerate(m_carbons) if m is not None and m != assigned[k]]
        for k in bad:
            warnings.append(f"the peak at {rt_s[cand[k]] / 60:.2f} min is numbered C{assigned[k]} by its position "
                            f"but its molecular ion says C{m_carbons[k]}")
        source = ["molecular ion" if m is not None and m == assigned[k] else "position"
                  for k, m in enumerate(m_carbons)]
    return FoundLadder(peaks=cand, rt_s=rt_s[cand], carbons=np.asarray(assigned, dtype=np.int64),
                       carbons_from=source, mol_ion_carbons=list(m_carbons), candidates=n_cand, warnings=warnings)


__all__ = ["FoundLadder", "find_alkanes", "INTRUDER_RATIO", "SKIP_RATIO"]
