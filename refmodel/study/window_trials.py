"""Monte Carlo of the fixed-point CFAR decision on independent windows.

A trial is one window deep inside a frame: a CUT and ``2R`` reference cells
(lagging side first, then leading side), every cell drawn independently,
quantised to an input word (:func:`refmodel.fixedpoint.input_quantiser.quantise_power`)
and decided with the pipeline's own integer steps:
:func:`window_statistic` (``docs/bit-true.md`` section 3, both sides
complete), ``spec.threshold_from_statistic`` (sections 4 to 6) and the
comparison of section 7. Frames, guard cells and edges play no part, so a
trial costs ``2R + 1`` random draws and a few array passes. The test suite
checks these decisions word for word against the pipeline models on the same
cells (:func:`interior_windows` extracts them from a frame).

The false-alarm count is binomial; :func:`clopper_pearson` gives its exact
confidence interval [1]_, computed by scipy.stats.binomtest.

References
----------
.. [1] C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial
   limits illustrated in the case of the binomial," Biometrika, vol. 26,
   no. 4, pp. 404-413, 1934.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from ..block_spec import BlockSpec
from ..fixedpoint.fixed_arith import scale_product
from ..fixedpoint.input_quantiser import quantise_power

__all__ = [
    "TrialCounts",
    "clopper_pearson",
    "interior_windows",
    "run_trials",
    "window_decisions",
    "window_statistic",
]

#: Trials drawn per block (keeps the working set in cache).
CHUNK_TRIALS = 4096
#: Trials whose float threshold is also formed, for the threshold-error statistics.
ERROR_TRIALS = 65536


def window_statistic(spec: BlockSpec, ref: np.ndarray) -> np.ndarray:
    """The integer noise statistic S of windows with both sides complete.

    Parameters
    ----------
    spec : BlockSpec
    ref : numpy.ndarray, shape (n, 2R)
        Reference words, the R lagging cells then the R leading cells (any
        numeric dtype holding integers below 2**53).

    Returns
    -------
    numpy.ndarray of int64
        ``S_lag + S_lead`` (ca), ``max``/``min`` of the side sums (go/so), the
        ``rank``-th smallest cell (os), as in ``docs/bit-true.md`` section 3.
    """
    r = spec.ref_per_side
    if spec.kind == "ca":
        return ref.sum(axis=1).astype(np.int64)
    if spec.kind in ("go", "so"):
        lag = ref[:, :r].sum(axis=1)
        lead = ref[:, r:].sum(axis=1)
        pick = np.maximum if spec.kind == "go" else np.minimum
        return pick(lag, lead).astype(np.int64)
    k = spec.rank - 1
    return np.partition(ref, k, axis=1)[:, k].astype(np.int64)


def window_decisions(spec: BlockSpec, cut: np.ndarray, ref: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Statistic, threshold word and detection flag of independent windows.

    Parameters
    ----------
    spec : BlockSpec
    cut : numpy.ndarray, shape (n,)
        CUT words.
    ref : numpy.ndarray, shape (n, 2R)
        Reference words, lagging side then leading side.

    Returns
    -------
    stat, threshold : numpy.ndarray of int64
    det : numpy.ndarray of bool
        ``(cut << F_T) > T`` (or ``>=``), ``docs/bit-true.md`` section 7.
    """
    stat = window_statistic(spec, ref)
    t = spec.threshold_from_statistic(stat)
    c = np.asarray(cut).astype(np.int64) << spec.threshold_frac_bits
    det = c > t if spec.compare == ">" else c >= t
    return stat, t, det


def interior_windows(spec: BlockSpec, samples: np.ndarray, last: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cells of every window that lies wholly inside its frame, from a stimulus stream.

    Returns
    -------
    index : numpy.ndarray of int64
        Stream positions of the CUTs (window-valid cells).
    cut : numpy.ndarray of int64
    ref : numpy.ndarray of int64, shape (len(index), 2R)
        Lagging cells ``x[n-H .. n-G-1]`` then leading cells ``x[n+G+1 .. n+H]``.
    """
    x = np.asarray(samples, dtype=np.int64)
    ends = np.flatnonzero(np.asarray(last, dtype=bool))
    starts = np.concatenate([[0], ends[:-1] + 1])
    r, g, h = spec.ref_per_side, spec.guard_per_side, spec.half_window
    idx = np.concatenate([np.arange(a + h, b - h + 1) for a, b in zip(starts, ends)] or [np.zeros(0, np.int64)])
    idx = idx.astype(np.int64)
    offs = np.concatenate([np.arange(-h, -g), np.arange(g + 1, h + 1)])
    ref = x[idx[:, None] + offs[None, :]] if idx.size else np.zeros((0, 2 * r), np.int64)
    return idx, x[idx], ref


def clopper_pearson(k: int, n: int, confidence: float) -> tuple[float, float]:
    """Exact (Clopper-Pearson) two-sided confidence interval of a binomial proportion [1]_.

    Parameters
    ----------
    k, n : int
        Successes and trials (``n >= 1``).
    confidence : float
        Confidence level in (0, 1), e.g. 0.999.

    Returns
    -------
    (float, float)
        Lower and upper limits: the beta quantiles ``B(a/2; k, n-k+1)`` and
        ``B(1-a/2; k+1, n-k)``, ``a = 1 - confidence``, via
        scipy.stats.binomtest(...).proportion_ci(method="exact").

    References
    ----------
    .. [1] Clopper & Pearson, Biometrika 26(4), 1934.
    """
    ci = stats.binomtest(int(k), int(n)).proportion_ci(confidence_level=confidence, method="exact")
    return float(ci.low), float(ci.high)


@dataclass(frozen=True)
class TrialCounts:
    """Outcome of a Monte Carlo run of independent windows.

    Attributes
    ----------
    trials, detections : int
        Windows drawn and windows whose CUT was declared a detection.
    saturated : int
        Windows whose threshold overflowed its width.
    clipped : int
        Cells (CUT and reference) whose power reached full scale.
    err_mean_lsb, err_rms_lsb, err_max_lsb : float
        Total threshold error ``T / 2**F_T - alpha * Z`` in input LSBs over the
        first trials (at most :data:`ERROR_TRIALS`), ``Z`` the float model's
        noise estimate from the same cells *before* quantisation (so input
        quantisation, clipping, alpha quantisation and rounding all count).
    """

    trials: int
    detections: int
    saturated: int
    clipped: int
    err_mean_lsb: float
    err_rms_lsb: float
    err_max_lsb: float

    @property
    def rate(self) -> float:
        return self.detections / self.trials if self.trials else math.nan


def _float_estimate(spec: BlockSpec, y: np.ndarray) -> np.ndarray:
    """The float model's estimate that alpha multiplies (mean, side mean, k-th smallest)."""
    r = spec.ref_per_side
    if spec.kind == "ca":
        return y.mean(axis=1)
    if spec.kind in ("go", "so"):
        lag, lead = y[:, :r].mean(axis=1), y[:, r:].mean(axis=1)
        return np.maximum(lag, lead) if spec.kind == "go" else np.minimum(lag, lead)
    k = spec.rank - 1
    return np.partition(y, k, axis=1)[:, k]


def run_trials(spec: BlockSpec, noise_lsb: float, trials: int, rng: np.random.Generator,
               chunk: int = CHUNK_TRIALS, converter: str = "floor") -> TrialCounts:
    """Count false alarms of the fixed pipeline over ``trials`` independent noise-only windows.

    Parameters
    ----------
    spec : BlockSpec
    noise_lsb : float
        Noise level (mean power) in input LSBs.
    trials : int
        Number of windows (>= 0).
    rng : numpy.random.Generator
        Source of the exponential powers (the run is reproducible from its seed).
    chunk : int
        Windows per block.
    converter : {"floor", "round"}
        Input converter (:func:`refmodel.fixedpoint.input_quantiser.quantise_power`).

    Returns
    -------
    TrialCounts
    """
    n_cells = spec.n_ref + 1
    full = float(1 << spec.input_bits) - (0.5 if converter == "round" else 0.0)
    buf = np.empty((chunk, n_cells))
    det_total = sat_total = clip_total = 0
    errs = []
    t_max = (1 << spec.threshold_bits) - 1
    done = 0
    while done < trials:
        m = min(chunk, trials - done)
        b = buf[:m]
        rng.standard_exponential(out=b)
        b *= noise_lsb
        clip_total += int(np.count_nonzero(b >= full))
        if done < ERROR_TRIALS:
            y = b.copy()
        quantise_power(b, spec.input_bits, out=b, converter=converter)
        stat, t, det = window_decisions(spec, b[:, 0], b[:, 1:])
        det_total += int(np.count_nonzero(det))
        t0 = scale_product(stat, spec.alpha_int, spec.drop_bits, spec.rounding, spec.truncate_partials)
        sat_total += int(np.count_nonzero((t0 > t_max) | (t0 < 0)))
        if done < ERROR_TRIALS:
            errs.append(t / 2.0 ** spec.threshold_frac_bits - spec.alpha * _float_estimate(spec, y[:, 1:]))
        done += m
    e = np.concatenate(errs) if errs else np.zeros(0)
    return TrialCounts(
        trials=int(trials), detections=det_total, saturated=sat_total, clipped=clip_total,
        err_mean_lsb=float(e.mean()) if e.size else math.nan,
        err_rms_lsb=float(np.sqrt(np.mean(e * e))) if e.size else math.nan,
        err_max_lsb=float(np.abs(e).max()) if e.size else math.nan,
    )

