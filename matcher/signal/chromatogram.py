"""Peak detection on a GC-MS run: the total-ion chromatogram, then extracted-ion chromatograms for co-elution.

Pure computation on arrays (no files): :func:`detect_peaks` takes the scan
times, the TIC and the flat centroided spectra of a run (as
:class:`matcher.io.run_files.RunData` holds them) and returns
:class:`DetectedPeaks`. Every step works on whole arrays.

**1. Noise.** The run's noise :math:`\\sigma` is the robust standard deviation
of the raw TIC's first differences, :math:`\\sigma = 1.4826\\,
\\mathrm{MAD}(\\Delta y)/\\sqrt 2` (the median absolute deviation, Hampel,
J. Am. Stat. Assoc. 69, 383, 1974; differencing removes the baseline, the
:math:`\\sqrt 2` undoes the variance doubling of a difference). Peaks occupy
few scans, so the median ignores them.

**2. Spikes and smoothing.** A single-scan spike (a point more than 6σ above
both neighbours and above them by more than half its own rise) takes the
value of its higher neighbour. Then a quadratic Savitzky–Golay filter (Savitzky and Golay,
Anal. Chem. 36, 1627, 1964) whose window is the run's own typical peak
width at half height (measured on a first pass with a 5-scan window, odd,
5–51 scans): it keeps peak heights and positions while averaging noise.

**3. Baseline.** A morphological opening (erosion, then dilation) of the
smoothed TIC with a flat window 15 peak widths long, then a moving average
over the same window, raised by the median of what lies below
:math:`3\\sigma` above it (the opening follows the lower edge of the noise).
A drifting baseline (column bleed in a programmed run) is followed;
peaks, narrower than the window, are not.

**4. Local maxima and the prominence rule.** A peak is a local maximum of the
smoothed, baseline-corrected TIC whose *prominence* (its height above the
higher of the two lowest points separating it from a higher maximum, the
topographic prominence as :func:`scipy.signal.peak_prominences` computes it)
is at least ``min_snr`` × :math:`\\sigma` (default 5) and whose width at half
height is at least 3 scans (a single-scan spike is not a peak). :math:`\\sigma` is the
RMS noise of the raw TIC, so the rule is about twice as strict as the
pharmacopoeial S/N = 2H/h ≥ 3 with peak-to-peak noise h ≈ 5σ (European
Pharmacopoeia 2.2.46, from memory) would be for the smoothed signal. A
noise-only run gives almost no peaks (tested).

**5. Per peak.** The apex time is interpolated between scans by the parabola
through the smoothed apex and its two neighbours; height is the parabola's
top above the baseline; the peak runs from where the signal falls to 0.5 % of
its prominence on either side, cut at the lowest point between it and a
neighbouring peak (a perpendicular drop, common practice, no source);
**area** is the trapezoidal integral of the raw TIC minus the baseline over
that span, in intensity × seconds; **S/N** = height / :math:`\\sigma`.

**6. Co-eluting compounds** follow the reconstructed-ion idea of Biller and
Biemann (Anal. Lett. 7, 515, 1974): each nominal mass's extracted-ion
chromatogram (smoothed like the TIC) has its own maxima; ions of one
compound peak together, ions of two compounds at two times. Within each TIC
peak, an ion maximum counts when it is the largest within half a peak width,
stands :data:`ION_SNR` × that ion's own noise and 2 % of the TIC above the
ion's level at the peak's edges, and is *sharp*: its curvature width
:math:`\\sqrt{-y/y''}` is at most 1.35 × the run's typical peak sigma (a
shared ion of two overlapping compounds has a broad, flat maximum; choosing
sharp ions as model ions is the approach of Dromey et al., Anal. Chem. 48,
1368, 1976). The components are the modes of the intensity-weighted density
of the counted ions' apex times (Gaussian kernel of 0.3 peak sigma; modes at
least 0.8 sigma apart); an ion within half a sigma of a mode belongs to it,
one between modes (shared by overlapping compounds) to none, and a mode
holding at least 5 % of the peak's counted ion signal is a component. A TIC
peak with two or more components is split: each component takes its
intensity-weighted ion apex time, its strongest ion as model ion, and a
share of the TIC at each scan in proportion to its model-ion profile times
its amount, found by non-negative least squares of the TIC on the model-ion
profiles (Lawson and Hanson, *Solving Least Squares Problems*, 1974; area and
height from that share).

**7. Spectra.** Each peak's spectrum is the apex scan (nearest scan to the
apex) at nominal mass (m/z rounded as floor(m/z + 0.3), common practice for
unit-resolution data, no source) minus the background, the mean of the two
scans at each edge of the peak; ions below 3 × their own noise are dropped.
For a split peak, ions that peak with another component are removed and
ions that peak with none are scaled by the component's share.

>>> t = np.arange(0, 600, 0.5)                                   # invented: one Gaussian peak at 300 s
>>> rng = np.random.default_rng(0)
>>> tic = 1000 + 5e4 * np.exp(-0.5 * ((t - 300.2) / 1.5) ** 2) + rng.normal(0, 50, t.size)
>>> found = detect_peaks(t, tic)
>>> len(found), round(float(found.rt_s[0]), 1), round(float(found.area[0] / (5e4 * 1.5 * np.sqrt(2 * np.pi))), 2)
(1, 300.2, 1.0)
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: Default prominence threshold, in units of the run's TIC noise SD (our choice; see the module doc).
MIN_SNR = 5.0
#: An ion maximum must stand this many of its own noise SDs above its level at the peak's edges.
ION_SNR = 5.0
#: Sharp ions: curvature width at most this many times the run's typical peak sigma.
SHARPNESS = 1.35
#: Two components' apex times differ by at least this many peak sigmas.
MODE_SEPARATION = 0.8
#: A component needs at least this share of its peak's counted ion signal.
MIN_COMPONENT_SHARE = 0.05
#: Baseline window, in typical peak widths at half height.
BASELINE_WIDTHS = 15
#: Least width at half height of a peak, in scans (a single-scan spike smoothed is about 2.5 scans wide).
MIN_WIDTH_SCANS = 3.0
#: Peak edges: where the signal falls to this fraction of the prominence.
EDGE_FRACTION = 0.005


@dataclass
class DetectedPeaks:
    """The peaks of one run (times in seconds) and what the plots need."""

    rt_s: np.ndarray           # interpolated apex times
    height: np.ndarray         # above the baseline
    area: np.ndarray           # intensity x seconds
    snr: np.ndarray            # height / noise
    start_s: np.ndarray
    end_s: np.ndarray
    apex_scan: np.ndarray      # int
    split: np.ndarray          # bool: a component of a TIC peak resolved on extracted ions
    model_ion: np.ndarray      # nominal m/z of the model ion of a split component (NaN otherwise)
    spectra: list              # per peak (mz, intensity) float64 arrays, sorted by m/z (may be empty arrays)
    noise: float = 0.0
    fwhm_s: float = 0.0
    smooth_window: int = 0
    time_s: np.ndarray = field(default_factory=lambda: np.zeros(0))
    tic: np.ndarray = field(default_factory=lambda: np.zeros(0))
    baseline: np.ndarray = field(default_factory=lambda: np.zeros(0))

    def __len__(self) -> int:
        return len(self.rt_s)


def robust_noise(y: np.ndarray) -> float:
    """RMS noise of a signal from the MAD of its first differences (see the module doc, step 1).

    >>> rng = np.random.default_rng(1)
    >>> round(robust_noise(np.linspace(0, 100, 20000) + rng.normal(0, 2.0, 20000)), 1)
    2.0
    """
    d = np.diff(np.asarray(y, dtype=np.float64))
    if d.size == 0:
        return 0.0
    return float(1.4826 * np.median(np.abs(d - np.median(d))) / np.sqrt(2.0))


def despike(y: np.ndarray, sigma: float) -> np.ndarray:
    """Single-scan spikes replaced by the higher neighbour (see the module doc, step 2).

    A point is a spike when it stands more than 6 σ above both neighbours and above them by more than half
    its own rise over the lower one; the apex of a peak at least 3 scans wide rises about a quarter at most.

    >>> despike(np.array([0., 1, 0, 50, 1, 0, 14, 20, 14, 0]), 1.0).tolist()   # a spike, then a narrow peak
    [0.0, 1.0, 0.0, 1.0, 1.0, 0.0, 14.0, 20.0, 14.0, 0.0]
    """
    y = np.asarray(y, dtype=np.float64)
    if len(y) < 3:
        return y
    mid, lo_n = y[1:-1], np.minimum(y[:-2], y[2:])
    hi_n = np.maximum(y[:-2], y[2:])
    spike = (mid - hi_n > 6.0 * sigma) & (mid - hi_n > 0.5 * (mid - lo_n))
    if not spike.any():
        return y
    out = y.copy()
    out[1:-1][spike] = hi_n[spike]
    return out


def _odd(v: float, lo: int, hi: int) -> int:
    k = int(round(v))
    k = max(lo, min(hi, k))
    return k if k % 2 else k + 1


def _savgol(y: np.ndarray, window: int, axis: int = 0, mode: str = "interp") -> np.ndarray:
    from scipy.signal import savgol_filter

    n = y.shape[axis]
    if n < 5:
        return y.astype(np.float64, copy=True)
    window = min(window, n if n % 2 else n - 1)
    return savgol_filter(y, window, 2, axis=axis, mode=mode)


def baseline_of(s: np.ndarray, window: int, sigma: float) -> np.ndarray:
    """Step 3 of the module doc: opening, moving average, raised to the middle of the noise."""
    from scipy.ndimage import grey_opening, uniform_filter1d

    window = max(3, min(int(window), len(s)))
    b = uniform_filter1d(grey_opening(s, size=window, mode="nearest"), size=window, mode="nearest")
    b = np.minimum(b, s.max())
    r = s - b
    quiet = r[r < 3.0 * sigma]
    if quiet.size:
        b = b + float(np.median(quiet))
    return b


def _parabola(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Offset (in scans, within ±0.5) and top of the parabola through three equally spaced points."""
    den = a - 2.0 * b + c
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.where(den < 0, 0.5 * (a - c) / den, 0.0)
    d = np.clip(np.nan_to_num(d), -0.5, 0.5)
    top = b - 0.25 * (a - c) * d
    return d, top


def _time_at(time_s: np.ndarray, pos: np.ndarray) -> np.ndarray:
    """Times at fractional scan positions (linear between scans)."""
    return np.interp(pos, np.arange(len(time_s)), time_s)


def ion_matrix(n_scans: int, scan_index, point_count, mz, intensity) -> tuple[np.ndarray, np.ndarray]:
    """(nominal masses, scans × masses intensity matrix) from flat centroided spectra (step 7's rounding)."""
    idx = np.asarray(scan_index, dtype=np.int64)
    cnt = np.asarray(point_count, dtype=np.int64)
    total = int(cnt.sum())
    if total == 0:
        return np.zeros(0), np.zeros((n_scans, 0))
    scan_of = np.repeat(np.arange(n_scans), cnt)
    pos = np.repeat(idx, cnt) + (np.arange(total) - np.repeat(np.cumsum(cnt) - cnt, cnt))
    nominal = np.floor(np.asarray(mz, dtype=np.float64)[pos] + 0.3).astype(np.int64)
    y = np.asarray(intensity, dtype=np.float64)[pos]
    lo = int(nominal.min())
    col = nominal - lo
    m = int(col.max()) + 1
    mat = np.bincount(scan_of * m + col, weights=y, minlength=n_scans * m).reshape(n_scans, m)
    used = np.flatnonzero(np.bincount(col, minlength=m))
    if len(used) < m:
        mat = mat[:, used]
    return (used + lo).astype(np.float64), mat


def detect_peaks(time_s, tic, scan_index=None, point_count=None, mz=None, intensity=None, *,
                 min_snr: float = MIN_SNR, deconvolve: bool = True) -> DetectedPeaks:
    """Peaks of a GC-MS run: TIC maxima by a prominence rule, co-eluting compounds split on extracted ions.

    Smoothing follows Savitzky and Golay [1]_ (quadratic, window = the run's peak width); the noise is the
    median absolute deviation of the TIC's first differences [2]_; co-eluting compounds are told apart by the
    maxima of their extracted-ion chromatograms [3]_, using only sharp ions as model ions [4]_, and share the
    TIC by non-negative least squares [5]_. The module docstring gives every step and threshold.

    Parameters
    ----------
    time_s : array of float
        Scan times, seconds, strictly increasing.
    tic : array of float
        Total-ion current per scan (any linear unit).
    scan_index, point_count, mz, intensity : arrays, optional
        The centroided spectra as ASTM E2077 stores them (first point and number of points per scan; m/z;
        intensities). Without them only the TIC is used and no spectra are given.
    min_snr : float
        A peak's prominence must be at least ``min_snr`` × the TIC's RMS noise (default 5).
    deconvolve : bool
        Split co-eluting compounds on extracted ions (default True).

    Returns
    -------
    DetectedPeaks
        Apex times (s, interpolated), heights, areas (intensity × s), S/N, edges, apex scans, whether each
        is a split component and its model ion, and background-subtracted spectra; plus the noise, the typical
        width and the smoothed baseline.

    The apex is the top of the parabola through the smoothed apex scan and its neighbours,
    :math:`t = t_i + \\delta\\,\\Delta t`, :math:`\\delta = \\tfrac12 (y_{i-1} - y_{i+1}) / (y_{i-1} - 2y_i + y_{i+1})`.

    Examples
    --------
    A Gaussian peak of height 5e4 and sigma 1.5 s at 300.2 s on noise of SD 50 (invented): its area is
    :math:`h \\sigma \\sqrt{2\\pi}` = 187,997 (the Gaussian integral, a textbook fact).

    >>> [(len(p), round(float(p.rt_s[0]), 2), round(float(p.area[0]) / 187997, 2)) for p in [detect_peaks(*_example())]]
    [(1, 300.2, 1.0)]

    References
    ----------
    .. [1] A. Savitzky, M. J. E. Golay, Smoothing and differentiation of data by simplified least squares
       procedures, Anal. Chem. 36, 1627-1639 (1964).
    .. [2] F. R. Hampel, The influence curve and its role in robust estimation, J. Am. Stat. Assoc. 69,
       383-393 (1974).
    .. [3] J. E. Biller, K. Biemann, Reconstructed mass spectra, a novel approach for the utilization of gas
       chromatograph-mass spectrometer data, Anal. Lett. 7, 515-528 (1974).
    .. [4] R. G. Dromey, M. J. Stefik, T. C. Rindfleisch, A. M. Duffield, Extraction of mass spectra free of
       background and neighboring component contributions from gas chromatography/mass spectrometry data,
       Anal. Chem. 48, 1368-1375 (1976).
    .. [5] C. L. Lawson, R. J. Hanson, Solving Least Squares Problems, Prentice-Hall (1974).
    """
    from scipy.signal import find_peaks, peak_widths

    t = np.asarray(time_s, dtype=np.float64)
    y = np.asarray(tic, dtype=np.float64)
    n = len(t)
    sigma = robust_noise(y)
    floor = 1e-9 * max(float(np.max(np.abs(y))) if n else 0.0, 1.0)
    sigma = max(sigma, floor)
    y = despike(y, sigma)

    # first pass: the run's typical peak width
    s0 = _savgol(y, 5)
    b0 = baseline_of(s0, max(101, n // 50), sigma)
    p0, first = find_peaks(s0 - b0, prominence=10.0 * sigma)
    fwhm = 5.0
    if len(p0):
        prom = first["prominences"]
        best = p0[np.argsort(prom)[::-1][:25]]
        w = peak_widths(s0 - b0, best, rel_height=0.5)[0]
        fwhm = float(np.median(w)) if len(w) else 5.0
    window = _odd(fwhm, 5, 51)
    s = _savgol(y, window)
    base = baseline_of(s, _odd(BASELINE_WIDTHS * max(fwhm, 3.0), 31, max(31, n)), sigma)
    yc = s - base

    pk, props = find_peaks(yc, prominence=min_snr * sigma)
    inside = (pk > 0) & (pk < n - 1)
    pk = pk[inside]
    pdata = (props["prominences"][inside], props["left_bases"][inside], props["right_bases"][inside])
    widths = peak_widths(yc, pk, rel_height=0.5, prominence_data=pdata)[0] if len(pk) else np.zeros(0)
    wide = widths >= MIN_WIDTH_SCANS   # a one-scan spike, smoothed, is narrower than this
    if not wide.all():
        pk, widths = pk[wide], widths[wide]
        pdata = tuple(a[wide] for a in pdata)
    typical_fwhm = float(np.median(widths)) if len(widths) else fwhm
    sig_ref = max(typical_fwhm / 2.3548, 0.75)  # scans
    if len(pk):
        _, _, lo, hi = peak_widths(yc, pk, rel_height=1.0 - EDGE_FRACTION, prominence_data=pdata)
        left = np.floor(lo).astype(np.int64)
        right = np.ceil(hi).astype(np.int64)
        # perpendicular drop at the lowest point between neighbouring peaks
        for k in range(len(pk) - 1):
            a, b = pk[k], pk[k + 1]
            v = a + int(np.argmin(yc[a:b + 1]))
            right[k] = min(right[k], v)
            left[k + 1] = max(left[k + 1], v)
        left = np.clip(left, 0, n - 1)
        right = np.clip(right, 0, n - 1)
    else:
        left = right = np.zeros(0, dtype=np.int64)

    d, top = _parabola(s[pk - 1], s[pk], s[pk + 1]) if len(pk) else (np.zeros(0), np.zeros(0))
    apex_pos = pk + d
    rt = _time_at(t, apex_pos)
    height = top - np.interp(apex_pos, np.arange(n), base) if len(pk) else np.zeros(0)
    raw = y - base
    area = _areas(t, raw, left, right)

    masses = matrix = None
    if scan_index is not None and mz is not None and len(pk):
        masses, matrix = ion_matrix(n, scan_index, point_count, mz, intensity)
    out = {
        "rt_s": list(rt), "height": list(height), "area": list(area), "start_s": list(t[left]), "end_s": list(t[right]),
        "apex_scan": list(np.clip(np.rint(apex_pos), 0, n - 1).astype(np.int64)), "split": [False] * len(pk),
        "model_ion": [np.nan] * len(pk), "spectra": [None] * len(pk),
    }
    if matrix is not None and matrix.shape[1]:
        ion_sigma = _column_noise(matrix)
        smooth = _RegionSmoother(matrix, window) if deconvolve else None
        replaced: dict[int, list] = {}
        for k in range(len(pk)):
            L, R = int(left[k]), int(right[k])
            comps = _components(smooth, matrix, ion_sigma, yc, L, R, sig_ref, t) if deconvolve else []
            if len(comps) >= 2:
                replaced[k] = _split(comps, matrix, ion_sigma, masses, raw, s, base, t, L, R, sigma)
            else:
                out["spectra"][k] = _spectrum(matrix, ion_sigma, masses, int(out["apex_scan"][k]), L, R, None, None)
        if replaced:
            rows = []
            for k in range(len(pk)):
                if k in replaced:
                    rows.extend(replaced[k])
                else:
                    rows.append({key: out[key][k] for key in out})
            out = {key: [r[key] for r in rows] for key in out}
    spectra = [sp if sp is not None else (np.zeros(0), np.zeros(0)) for sp in out["spectra"]]
    h = np.asarray(out["height"], dtype=np.float64)
    return DetectedPeaks(
        rt_s=np.asarray(out["rt_s"], dtype=np.float64), height=h, area=np.asarray(out["area"], dtype=np.float64),
        snr=h / sigma, start_s=np.asarray(out["start_s"], dtype=np.float64),
        end_s=np.asarray(out["end_s"], dtype=np.float64), apex_scan=np.asarray(out["apex_scan"], dtype=np.int64),
        split=np.asarray(out["split"], dtype=bool), model_ion=np.asarray(out["model_ion"], dtype=np.float64),
        spectra=spectra, noise=sigma, fwhm_s=float(typical_fwhm * np.median(np.diff(t))) if n > 1 else 0.0,
        smooth_window=window, time_s=t, tic=y, baseline=base,
    )


def _example() -> tuple[np.ndarray, np.ndarray]:
    """The invented run of :func:`detect_peaks`' example: one Gaussian (5e4, sigma 1.5 s, 300.2 s) on noise."""
    t = np.arange(0, 600, 0.5)
    return t, 1000 + 5e4 * np.exp(-0.5 * ((t - 300.2) / 1.5) ** 2) + np.random.default_rng(0).normal(0, 50, t.size)


def _areas(t: np.ndarray, raw: np.ndarray, left: np.ndarray, right: np.ndarray) -> np.ndarray:
    """Trapezoidal integrals of ``raw`` between each pair of scans, from one cumulative sum."""
    if not len(left):
        return np.zeros(0)
    seg = 0.5 * (raw[1:] + raw[:-1]) * np.diff(t)
    cum = np.r_[0.0, np.cumsum(seg)]
    return cum[right] - cum[left]


class _RegionSmoother:
    """The extracted-ion chromatograms smoothed like the TIC, computed only for the scans a peak spans
    (with a margin of one window, so the result equals smoothing the whole run there)."""

    def __init__(self, matrix: np.ndarray, window: int) -> None:
        self.matrix, self.window = matrix, window

    def rows(self, a: int, b: int) -> np.ndarray:
        n = self.matrix.shape[0]
        lo, hi = max(0, a - self.window), min(n, b + self.window)
        # the margin keeps the slice's own edges (mode "nearest") away from the rows returned
        return _savgol(self.matrix[lo:hi], self.window, mode="nearest")[a - lo:b - lo]


def _column_noise(matrix: np.ndarray) -> np.ndarray:
    """Per-mass noise SD (step 1 on each extracted-ion chromatogram), floored for silent masses."""
    step = max(1, matrix.shape[0] // 4000)  # a sample of rows is enough for a median
    d = np.diff(matrix[::step], axis=0)
    sig = 1.4826 * np.median(np.abs(d), axis=0) / np.sqrt(2.0)
    peak = matrix.max(axis=0) if matrix.shape[0] else np.zeros(matrix.shape[1])
    return np.maximum(sig, 1e-6 * np.maximum(peak, 1.0))


def _components(smooth, matrix, ion_sigma, yc, L, R, sig_ref, t) -> list[dict]:
    """Clusters of sharp ion maxima inside one TIC peak (step 6); a list of components, each a dict."""
    from scipy.ndimage import maximum_filter1d

    if R - L < 4:
        return []
    A = smooth.rows(L, R + 1)
    edge = np.minimum(A[:2].mean(axis=0), A[-2:].mean(axis=0))
    h = max(1, int(round(sig_ref * 1.18)))
    peakmax = maximum_filter1d(A, size=2 * h + 1, axis=0, mode="nearest")
    above = A - edge
    need = np.maximum(ION_SNR * ion_sigma[None, :], 0.02 * np.maximum(yc[L:R + 1], 0)[:, None])
    cand = (A >= peakmax) & (above > need)
    cand[0] = cand[-1] = False
    rows, cols = np.nonzero(cand)
    if len(rows) < 2:
        return []
    a, b, c = A[rows - 1, cols], A[rows, cols], A[rows + 1, cols]
    curv = a - 2.0 * b + c
    with np.errstate(divide="ignore", invalid="ignore"):
        width = np.sqrt(np.where(curv < 0, (b - edge[cols]) / -curv, np.inf))
    sharp = width <= SHARPNESS * sig_ref
    rows, cols = rows[sharp], cols[sharp]
    if len(rows) < 2:
        return []
    d, top = _parabola(A[rows - 1, cols], A[rows, cols], A[rows + 1, cols])
    pos = L + rows + d
    wgt = top - edge[cols]
    # modes of the intensity-weighted density of apex times (bandwidth 0.3 sigma); ions near a mode join it,
    # ions between modes (shared by overlapping compounds) join none
    diff = pos[:, None] - pos[None, :]
    dens = (wgt[None, :] * np.exp(-0.5 * (diff / (0.3 * sig_ref)) ** 2)).sum(axis=1)
    near = np.abs(diff) <= MODE_SEPARATION * sig_ref
    is_mode = np.all(~near | (dens[:, None] > dens[None, :]) | ((dens[:, None] == dens[None, :]) &
                                                                 (np.arange(len(pos))[:, None] <= np.arange(len(pos))[None, :])), axis=1)
    modes = np.sort(pos[is_mode])
    total = float(wgt.sum())
    comps = []
    for m in modes:
        g = np.flatnonzero(np.abs(pos - m) <= 0.5 * sig_ref)
        w = float(wgt[g].sum())
        if not len(g) or w < MIN_COMPONENT_SHARE * total:
            continue
        p = float(np.sum(pos[g] * wgt[g]) / w)
        model = int(cols[g][np.argmax(wgt[g])])
        comps.append({"pos": p, "weight": w, "ions": set(int(x) for x in cols[g]), "model": model})
    return comps


def _split(comps, matrix, ion_sigma, masses, raw, s, base, t, L, R, sigma) -> list[dict]:
    """Rows for the components of one TIC peak: shares of the TIC by model-ion profile (step 6)."""
    n = len(t)
    span = np.arange(L, R + 1)
    prof = []
    for c in comps:
        col = matrix[span, c["model"]].astype(np.float64)
        col = np.clip(col - min(col[0], col[-1]), 0, None)
        apex = int(np.clip(round(c["pos"]), L, R))
        top = col[apex - L] if col[apex - L] > 0 else (col.max() or 1.0)
        prof.append(col / top)
    prof = np.array(prof)
    # each component's TIC follows its model ion: TIC ≈ Σ a_c · profile_c, a_c ≥ 0 (non-negative least squares)
    from scipy.optimize import nnls

    try:
        coef = nnls(prof.T, np.clip(raw[span], 0, None))[0]
    except (ValueError, RuntimeError):
        coef = np.array([c["weight"] for c in comps], dtype=np.float64)
    if not np.any(coef > 0):
        coef = np.array([c["weight"] for c in comps], dtype=np.float64)
    prof = prof * coef[:, None]
    tot = prof.sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(tot > 0, prof / tot, 1.0 / len(comps))
    seg_t = t[span]
    rows = []
    for k, c in enumerate(comps):
        part = raw[span] * share[k]
        area = float(np.sum(0.5 * (part[1:] + part[:-1]) * np.diff(seg_t))) if len(span) > 1 else 0.0
        apex = int(np.clip(round(c["pos"]), L, R))
        shares_here = share[:, apex - L]
        height = float((s[apex] - base[apex]) * shares_here[k])
        others = set().union(*[o["ions"] for j, o in enumerate(comps) if j != k])
        rows.append({
            "rt_s": float(_time_at(t, np.array([c["pos"]]))[0]), "height": height, "area": area,
            "start_s": float(t[L]), "end_s": float(t[R]), "apex_scan": apex, "split": True,
            "model_ion": float(masses[c["model"]]),
            "spectrum_args": None,
            "spectra": _spectrum(matrix, ion_sigma, masses, apex, L, R, (c["ions"], others - c["ions"]),
                                 float(shares_here[k])),
        })
    for r in rows:
        r.pop("spectrum_args")
    return rows


def _spectrum(matrix, ion_sigma, masses, apex, L, R, split, share) -> tuple[np.ndarray, np.ndarray]:
    """Background-subtracted apex spectrum (step 7)."""
    n = matrix.shape[0]
    lo = matrix[max(L - 1, 0):L + 1].mean(axis=0)
    hi = matrix[R:min(R + 2, n)].mean(axis=0)
    spec = matrix[apex] - 0.5 * (lo + hi)
    if split is not None:
        own, foreign = split
        spec = spec.copy()
        if foreign:
            spec[list(foreign)] = 0.0
        shared = np.ones(len(spec), dtype=bool)
        if own or foreign:
            shared[list(own | foreign)] = False
        spec[shared] *= share
    keep = spec > 3.0 * ion_sigma
    return masses[keep].astype(np.float64), spec[keep].astype(np.float64)


__all__ = ["DetectedPeaks", "detect_peaks", "robust_noise", "despike", "baseline_of", "ion_matrix", "MIN_SNR", "ION_SNR"]
