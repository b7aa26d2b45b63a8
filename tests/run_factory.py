"""Invented GC-MS runs written as ASTM E2077 netCDF files with SciPy's netCDF writer.

The layout follows ASTM E2077 (analytical data interchange protocol for mass
spectrometric data): dimensions ``scan_number`` and ``point_number``; per-scan
variables ``scan_acquisition_time`` (seconds), ``total_intensity``,
``scan_index`` and ``point_count``; per-point ``mass_values`` and
``intensity_values``; global attributes ``ms_template_revision`` and
``dataset_completeness`` as the standard names them (from memory of the
specification; the required variables are what matters to the reader).

Every compound, spectrum and number here is invented. Peaks are Gaussian in
time, so the area written is known exactly: height × sigma × sqrt(2 pi).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass
class Compound:
    name: str
    apex_s: float                 # apex time, seconds
    height: float                 # TIC height at the apex (sum of the spectrum)
    spectrum: dict                # m/z -> relative intensity
    sigma_s: float = 1.0          # Gaussian sigma, seconds
    ri: float | None = None       # the index the test expects (invented)
    mol_ion: int | None = None

    @property
    def area(self) -> float:
        """The TIC area written, intensity x seconds."""
        return float(self.height * self.sigma_s * np.sqrt(2 * np.pi))


@dataclass
class Run:
    times: np.ndarray
    compounds: list = field(default_factory=list)


def alkane_spectrum(n: int) -> dict:
    """An invented n-alkane-like spectrum: the CnH2n+1 series 43/57/71/85/... and M+ = 14n + 2 at 3 %."""
    spec = {29: 8.0, 41: 30.0, 43: 85.0, 55: 12.0, 57: 100.0, 69: 5.0, 71: 55.0, 85: 35.0}
    m, rel = 99, 18.0
    while m < 14 * n - 13:
        spec[m] = rel
        rel = max(rel * 0.6, 1.5)
        m += 14
    spec[14 * n + 2] = 3.0
    return spec


def invented_spectrum(rng: np.random.Generator, mol_ion: int) -> dict:
    """A spectrum of ions below an invented molecular ion (even mass), base peak somewhere in the middle."""
    n_ions = int(rng.integers(8, 16))
    ions = rng.choice(np.arange(39, mol_ion - 14), size=min(n_ions, mol_ion - 60), replace=False)
    rel = rng.uniform(5, 70, len(ions))
    rel[int(rng.integers(len(ions)))] = 100.0
    spec = {int(m): float(r) for m, r in zip(ions, rel)}
    spec[int(mol_ion)] = float(rng.uniform(15, 40))
    return spec


def simulate(compounds, *, minutes: float = 30.0, scans: int = 10_000, noise: float = 30.0,
             ion_noise_masses=(44, 73, 207, 281), baseline: float = 200.0, drift: float = 100.0,
             seed: int = 1) -> dict:
    """Per-scan masses and intensities of a run holding ``compounds`` (Gaussian peaks) on a noisy baseline.

    Noise: each background mass gets Gaussian noise of SD ``noise`` (clipped at 0) on a slowly rising
    level (``baseline`` + ``drift`` x t / run length, shared among them); compound ions are exact.
    """
    rng = np.random.default_rng(seed)
    t = np.linspace(0.0, minutes * 60.0, scans)
    masses = sorted({int(m) for c in compounds for m in c.spectrum} | set(ion_noise_masses))
    col = {m: k for k, m in enumerate(masses)}
    mat = np.zeros((scans, len(masses)))
    for c in compounds:
        prof = c.height * np.exp(-0.5 * ((t - c.apex_s) / c.sigma_s) ** 2)
        total = sum(c.spectrum.values())
        for m, r in c.spectrum.items():
            mat[:, col[int(m)]] += prof * r / total
    level = (baseline + drift * t / t[-1]) / max(len(ion_noise_masses), 1)
    for m in ion_noise_masses:
        mat[:, col[m]] += np.clip(level + rng.normal(0.0, noise / np.sqrt(len(ion_noise_masses)), scans), 0, None)
    return {"times": t, "masses": np.asarray(masses, dtype=float), "matrix": mat}


def counting_noise(compounds, *, background: float = 20.0, masses=range(35, 301), seed: int = 1, **kw) -> dict:
    """Like :func:`simulate`, but every mass in ``masses`` carries a chemical background of ``background``
    counts and every intensity is a Poisson count (ion-counting noise on every m/z of every scan)."""
    sim = simulate(compounds, ion_noise_masses=tuple(masses), noise=0.0, baseline=0.0, drift=0.0, seed=seed, **kw)
    sim["matrix"] = np.random.default_rng(seed).poisson(sim["matrix"] + background).astype(float)
    return sim


def write_e2077(path, sim: dict, *, keep_zeros: bool = False, version: int = 1) -> None:
    """Write the simulated run as an ASTM E2077 netCDF-3 file with :class:`scipy.io.netcdf_file`."""
    from scipy.io import netcdf_file

    t, masses, mat = sim["times"], sim["masses"], sim["matrix"]
    keep = np.ones_like(mat, dtype=bool) if keep_zeros else mat > 0
    counts = keep.sum(axis=1).astype(np.int32)
    index = np.r_[0, np.cumsum(counts)[:-1]].astype(np.int32)
    mz = np.broadcast_to(masses, mat.shape)[keep]
    y = mat[keep]
    with netcdf_file(str(path), "w", version=version) as nc:
        nc.dataset_completeness = "C1+C2"
        nc.ms_template_revision = "1.0.1"
        nc.experiment_title = "invented run for matcher tests"
        nc.createDimension("scan_number", len(t))
        nc.createDimension("point_number", max(len(mz), 1))
        v = nc.createVariable("scan_acquisition_time", "d", ("scan_number",))
        v[:] = t
        v.units = "Seconds"
        nc.createVariable("total_intensity", "d", ("scan_number",))[:] = mat.sum(axis=1)
        nc.createVariable("scan_index", "i", ("scan_number",))[:] = index
        nc.createVariable("point_count", "i", ("scan_number",))[:] = counts
        nc.createVariable("mass_values", "d", ("point_number",))[:] = mz if len(mz) else [0.0]
        nc.createVariable("intensity_values", "f", ("point_number",))[:] = y if len(y) else [0.0]


def ladder_compounds(first: int = 8, last: int = 20, *, start_s: float = 240.0, step_s: float = 130.0,
                     height: float = 2.0e5, sigma_s: float = 1.0) -> list:
    """An invented n-alkane ladder: one alkane every ``step_s`` seconds (a programmed oven's even spacing)."""
    out = []
    for k, n in enumerate(range(first, last + 1)):
        out.append(Compound(f"C{n}", start_s + k * step_s + 3.7 * np.sin(k), height * (1 + 0.3 * np.cos(k)),
                            alkane_spectrum(n), sigma_s=sigma_s, ri=100.0 * n, mol_ion=14 * n + 2))
    return out
