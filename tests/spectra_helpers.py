"""Constructed (NOT measured) EI-like mass spectra for tests and the benchmark.

The spectra are invented: compounds of one formula share a family of
fragment ions (seeded by the formula) with intensities varied per compound
(seeded by the name) and two ions of their own, so that isomers look alike,
as terpene isomers do, without being identical. An "unknown" is its
compound's spectrum with multiplicative noise, a few small stray peaks and
the molecular ion removed.
"""

from __future__ import annotations

import zlib

import numpy as np

from matcher.chem.formula import nominal_mass
from matcher.io.jcamp import JcampSpectrum, jcamp_text


def _rng(text: str) -> np.random.Generator:
    return np.random.default_rng(zlib.crc32(text.encode("utf-8")))


def constructed_spectrum(name: str, formula: str) -> tuple[np.ndarray, np.ndarray]:
    """An invented reference spectrum: family ions of the formula, varied by the compound, plus its own two ions."""
    m = int(nominal_mass(formula))
    fam = _rng("family " + formula)
    ions = np.unique(np.r_[fam.choice(np.arange(39, m - 1), size=min(14, m - 40), replace=False), m])
    base = fam.uniform(5, 100, len(ions))
    base[ions == m] = fam.uniform(5, 30)  # a modest molecular ion, as for most terpenes
    own = _rng("compound " + name)
    y = base * np.exp(own.normal(0.0, 0.6, len(ions)))
    extra = own.choice(np.setdiff1d(np.arange(39, m), ions), size=2, replace=False)
    mz = np.r_[ions, extra].astype(float)
    y = np.r_[y, own.uniform(20, 60, 2)]
    order = np.argsort(mz)
    mz, y = mz[order], y[order]
    return mz, np.round(100.0 * y / y.max(), 1)


def noisy_unknown(spectrum, formula: str, rng: np.random.Generator, *, noise: float = 0.2, strays: int = 3):
    """A measured-looking copy: intensities × exp(N(0, noise)), stray small peaks, no molecular ion."""
    mz, y = spectrum
    m = int(nominal_mass(formula))
    keep = mz != m
    mz, y = mz[keep], y[keep] * np.exp(rng.normal(0.0, noise, int(keep.sum())))
    stray = np.setdiff1d(rng.choice(np.arange(35, m), size=strays, replace=False), mz)
    mz = np.r_[mz, stray]
    y = np.r_[y, rng.uniform(0.5, 4.0, len(stray))]
    order = np.argsort(mz)
    return mz[order], np.round(y[order], 2)


def library_jcamp(rows) -> str:
    """A JCAMP-DX text with one constructed reference spectrum per row (name, formula, cas)."""
    items = []
    for r in rows:
        mz, y = constructed_spectrum(r["name"], r["formula"])
        items.append(JcampSpectrum(title=r["name"], mz=mz, intensity=y, cas=r.get("cas", ""), molform=r["formula"],
                                   origin="constructed for the matcher tests (not measured)", owner="public domain"))
    return jcamp_text(items)


def run_jcamp(peak_ids, spectra) -> str:
    """A run's spectra file: one block per peak, titled by its peak id."""
    return jcamp_text([JcampSpectrum(title=str(p), mz=s[0], intensity=s[1]) for p, s in zip(peak_ids, spectra)])
