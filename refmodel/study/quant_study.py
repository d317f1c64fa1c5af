"""The quantisation-loss study: what each word width costs in false alarms, detection and SNR.

A study sweeps the fixed-point formats of one block spec over a grid (the
cartesian product of the values given for each axis; axes not given stay at
the spec's value):

=======================  =========================================================
axis                     meaning
=======================  =========================================================
``input_bits``           input word width ``W_in``
``alpha_frac_bits``      fraction bits ``F_A`` of the constant A
``alpha_csd_digits``     non-zero signed digits allowed in A (0: plain rounding)
``threshold_frac_bits``  fraction bits ``F_T`` kept in the threshold
``threshold_bits``       threshold width ``W_T`` (0: the automatic width, which never saturates)
``sum_bits``             side-sum width ``W_S`` (0: the automatic, smallest lossless width)
``rounding``             product rounding mode
``input_converter``      ``floor`` or ``round`` (to nearest): how the analogue power becomes a word
                         (:mod:`refmodel.fixedpoint.input_quantiser`)
``constant``             ``rounded`` (A = alpha rounded) or ``retuned`` (A chosen on the exact Pfa,
                         :mod:`refmodel.study.retune`)
``noise_level_lsb``      mean noise power in LSBs of the spec's input word
=======================  =========================================================

With ``noise_range_lsb`` the budget must also hold at every level of a
range of noise levels (geometric steps); the worst case is reported.

For every grid point (:func:`evaluate_point`) the fixed pipeline is compared
with the float model that it approximates, both fed the same square-law
exponential noise (noise level ``m`` LSBs; input convention of
:mod:`refmodel.fixedpoint.input_quantiser`):

* the realised threshold factor and the Pfa the float formula gives for it;
* the pipeline's exact Pfa (:mod:`refmodel.fixedpoint.exact_pfa`) with its error bound,
  and a Monte Carlo count (:mod:`refmodel.study.window_trials`) with a
  Clopper-Pearson interval;
* Pd at each SNR for Swerling 0 and Swerling I targets, fixed (exact) and
  float (:func:`refmodel.threshold_design.pd`);
* the SNR the pipeline needs for the target Pd and two differences (dB):
  ``loss`` -- against the float detector *run at the pipeline's own exact
  Pfa* (so a threshold that merely moved the Pfa is not counted as a gain or
  a loss; this is the quantisation loss proper), and ``snr_shift`` -- against
  the float detector at the design Pfa (negative when quantisation raised the
  Pfa, which buys Pd with false alarms);
* the exact Pfa again with the noise 3 dB higher: a CFAR detector keeps its
  Pfa when the noise level changes, a pipeline whose threshold is set by the
  LSB rather than by the noise (noise well below one LSB) does not -- and
  can then even show a negative ``loss``, the gain of a fixed threshold that
  knows the noise level, which is no gain in a real scene;
* threshold error in input LSBs, threshold saturation and input clipping
  rates.

:func:`recommend` picks the cheapest point within a budget (loss and Pfa
tolerance), by area when the caller hands in an area-costing callable
(``run_study(..., area=...)``; :mod:`hdl_tb.area_cost` provides one: refmodel
never imports hdl_tb), else by word bits. Points are independent and are run in parallel on local
processes or on a Dask cluster; each draws its Monte Carlo from its own
stream ``SeedSequence(seed, spawn_key=(index,))``, so results do not depend
on where or in which order they ran.

References
----------
.. [1] M. A. Richards, *Fundamentals of Radar Signal Processing*,
   McGraw-Hill, 2005, ch. 7 (CFAR loss: the extra SNR a detector needs for
   the same Pd and Pfa).
.. [2] M. E. O'Neill, "PCG: a family of simple fast space-efficient
   statistically good algorithms for random number generation," Harvey Mudd
   College, HMC-CS-2014-0905, 2014 (numpy's default bit generator, seeded
   per point through numpy.random.SeedSequence).
"""

from __future__ import annotations

import itertools
import math
import os
import sys
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

import numpy as np
from scipy import optimize

from .. import threshold_design as td
from ..block_spec import BlockSpec, spec_from_dict
from ..map_spec import interior_twin
from ..errors import SpecError, require
from ..spec_fields import choice, choice_list, integer, integer_list, number, number_list
from ..fixedpoint.exact_pfa import trigger_law
from ..fixedpoint.fixed_arith import ROUNDING_MODES
from ..fixedpoint.input_quantiser import CONVERTERS, clip_rate
from .retune import RETUNE_MODES, retune_constant
from .window_trials import clopper_pearson, run_trials

__all__ = [
    "AXES",
    "StudyConfig",
    "StudyResult",
    "SweepPoint",
    "evaluate_point",
    "recommend",
    "run_study",
    "study_config",
    "sweep_points",
]

#: Sweep axes, in grid order.
AXES = ("input_bits", "alpha_frac_bits", "alpha_csd_digits", "threshold_frac_bits", "threshold_bits", "sum_bits",
        "rounding", "input_converter", "constant", "noise_level_lsb")
#: Axes that are fields of the spec's [fixed] section.
FIXED_AXES = ("input_bits", "alpha_frac_bits", "alpha_csd_digits", "threshold_frac_bits", "threshold_bits",
              "sum_bits", "rounding")
#: Axes where 0 means "the automatic width".
AUTO_AXES = ("threshold_bits", "sum_bits")
#: Values of the constant axis.
CONSTANTS = ("rounded", "retuned")
#: Command-line option of each setting (the field named in errors when the value came from there).
OPTIONS = {
    "input_bits": "--input-bits",
    "alpha_frac_bits": "--alpha-frac-bits",
    "alpha_csd_digits": "--alpha-csd-digits",
    "threshold_frac_bits": "--threshold-frac-bits",
    "threshold_bits": "--threshold-bits",
    "sum_bits": "--sum-bits",
    "rounding": "--rounding",
    "input_converter": "--input-converter",
    "constant": "--constant",
    "retune": "--retune",
    "noise_level_lsb": "--noise-lsb",
    "noise_range_lsb": "--noise-range",
    "noise_range_points": "--noise-range-points",
    "noise_scaling": "--noise-scaling",
    "snr_db": "--snr-db",
    "pd": "--pd",
    "swerling": "--swerling",
    "mc_trials": "--mc-trials",
    "confidence": "--confidence",
    "seed": "--seed",
    "max_loss_db": "--max-loss-db",
    "pfa_tolerance": "--pfa-tolerance",
    "area_flow": "--area-flow",
    "area_weights": "--area-weights",
}
#: Flows the area can be costed with (checked here; costed by the caller's area callable).
AREA_FLOWS = ("ice40", "xilinx")
_INT_RANGES = {"input_bits": (1, 32), "alpha_frac_bits": (0, 40), "alpha_csd_digits": (0, 16),
               "threshold_frac_bits": (0, 40), "threshold_bits": (0, 62), "sum_bits": (0, 64)}
NOISE_SCALINGS = ("track", "fixed")
DEFAULTS = {
    "area_flow": "ice40",
    "area_weights": None,
    "retune": "closest-not-above",
    "noise_range_lsb": None,
    "noise_range_points": 5,
    "noise_scaling": "track",
    "snr_db": (6.0, 10.0, 13.0, 16.0, 20.0),
    "pd": 0.9,
    "swerling": (0, 1),
    "mc_trials": 1_000_000,
    "confidence": 0.999,
    "seed": 1,
    "max_loss_db": 0.1,
    "pfa_tolerance": 0.1,
}
#: Largest grid accepted.
MAX_POINTS = 10_000
#: How long to try to reach a Dask scheduler.
DASK_CONNECT_TIMEOUT = "10s"
#: SNR search range (dB) for the SNR the pipeline needs.
SNR_SEARCH_DB = (-30.0, 120.0)


# --------------------------------------------------------------------------
# Configuration
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class StudyConfig:
    """A validated study: the grid and the settings of every metric.

    Attributes
    ----------
    axes : dict
        Axis name -> tuple of values (all six axes; one value when not swept).
    swept : tuple of str
        Axes given more than one value.
    fields : dict
        Axis or setting -> the name to use in errors (``--option`` or ``study.key``).
    noise_scaling : {"track", "fixed"}
        ``track``: the noise level is in LSBs of the spec's input word and
        follows the input width (``m * 2**(W_in - W_spec)``, the same analog
        level seen through a wider or narrower word); ``fixed``: the noise
        sits at the given number of LSBs whatever the width.
    snr_db : tuple of float
        SNRs (dB) of the Pd table.
    pd : float
        Pd at which the SNR needed and the loss are taken.
    swerling : tuple of int
        Target models (0, 1).
    mc_trials : int
        Monte Carlo windows per point (0: none).
    confidence : float
        Confidence level of the Clopper-Pearson intervals.
    seed : int
        Root seed; point ``i`` uses ``SeedSequence(seed, spawn_key=(i,))``.
    max_loss_db, pfa_tolerance : float
        Budget: loss at most ``max_loss_db`` for every target model and
        ``|Pfa / Pfa_design - 1| <= pfa_tolerance`` both at the noise level
        and at twice it (the CFAR property).
    design_pfa : float
        Pfa the float design gives (the spec's ``design_pfa``, or the float
        formula at its ``alpha``).
    base_input_bits : int
        The spec's input width (reference for ``noise_scaling = "track"``).
    retune : {"closest-not-above", "closest"}
        How the ``retuned`` constant is chosen (:mod:`refmodel.study.retune`).
    noise_range : tuple of float or None
        Noise levels (LSBs of the spec's input word, before ``track``
        scaling) over which the budget must also hold.
    given : tuple of str
        Axes whose values the user gave (option or ``[study]``).
    area_flow : {"ice40", "xilinx"}
        Flow the caller's area costing should use.
    area_weights : str, mapping or None
        LUT-equivalent weights as given (parsed by the area costing, which
        names ``fields["area_weights"]`` in its errors).
    """

    axes: dict
    swept: tuple
    fields: dict
    noise_scaling: str
    snr_db: tuple
    pd: float
    swerling: tuple
    mc_trials: int
    confidence: float
    seed: int
    max_loss_db: float
    pfa_tolerance: float
    design_pfa: float
    base_input_bits: int
    retune: str = "closest-not-above"
    noise_range: tuple | None = None
    given: tuple = ()
    area_flow: str = "ice40"
    area_weights: Any = None

    def to_dict(self) -> dict:
        """Plain, JSON-ready form."""
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["axes"] = {k: list(v) for k, v in self.axes.items()}
        d["swept"] = list(self.swept)
        d["given"] = list(self.given)
        d["noise_range"] = list(self.noise_range) if self.noise_range else None
        return d


def _default_noise(spec: BlockSpec) -> float:
    """Default noise level: ``2**floor(W_in / 2)`` LSBs (half the word's range for noise, half as headroom)."""
    return float(2 ** (spec.input_bits // 2))


def study_config(spec: BlockSpec, options: Mapping[str, Any] | None = None) -> StudyConfig:
    """Validate the spec's ``[study]`` section merged with command-line options.

    Parameters
    ----------
    spec : BlockSpec
        The base block; its ``sections["study"]`` holds the TOML settings.
    options : mapping, optional
        Settings given on the command line (key as in :data:`OPTIONS`, value a
        string, number or list; ``None`` means not given). They win over
        ``[study]``.

    Returns
    -------
    StudyConfig

    Raises
    ------
    SpecError
        Naming the option (``--input-bits``) or field (``study.input_bits``).
    """
    spec = interior_twin(spec)  # a map block is studied as its 1D arithmetic twin (refmodel/map_spec.py)
    raw = dict(spec.sections.get("study", {}))
    known = set(OPTIONS)
    unknown = sorted(set(raw) - known)
    require(not unknown, f"study.{unknown[0] if unknown else ''}", "unknown field", ", ".join(sorted(known)))
    opts = {k: v for k, v in (options or {}).items() if v is not None}
    fields, values = {}, {}
    for key in OPTIONS:
        if key in opts:
            fields[key], values[key] = OPTIONS[key], opts[key]
        elif key in raw:
            fields[key], values[key] = f"study.{key}", raw[key]
        else:
            fields[key] = f"study.{key}"

    base = {
        "input_bits": spec.input_bits, "alpha_frac_bits": spec.alpha_frac_bits,
        "alpha_csd_digits": spec.alpha_csd_digits, "threshold_frac_bits": spec.threshold_frac_bits,
        "threshold_bits": 0 if "threshold_bits" not in _base_data(spec)["fixed"] else spec.threshold_bits,
        "sum_bits": 0 if "sum_bits" not in _base_data(spec)["fixed"] else spec.sum_bits,
        "rounding": spec.rounding, "input_converter": "floor", "constant": "rounded",
        "noise_level_lsb": _default_noise(spec),
    }
    axes = {}
    for name in AXES:
        if name not in values:
            axes[name] = CONSTANTS if name == "constant" else (base[name],)
        elif name in _INT_RANGES:
            axes[name] = integer_list(fields[name], values[name], *_INT_RANGES[name])
        elif name == "rounding":
            axes[name] = choice_list(fields[name], values[name], ROUNDING_MODES)
        elif name == "constant":
            axes[name] = choice_list(fields[name], values[name], CONSTANTS)
        elif name == "input_converter":
            axes[name] = choice_list(fields[name], values[name], tuple(CONVERTERS))
        else:
            axes[name] = number_list(fields[name], values[name], 0.0, open_lo=True)
    n_points = math.prod(len(v) for v in axes.values())
    require(n_points <= MAX_POINTS, "study", f"the grid has {n_points} points", f"at most {MAX_POINTS} points")

    def get(key):
        return values.get(key, DEFAULTS[key])

    scaling = choice(fields["noise_scaling"], get("noise_scaling"), NOISE_SCALINGS)
    retune = choice(fields["retune"], get("retune"), RETUNE_MODES)
    area_flow = choice(fields["area_flow"], get("area_flow"), AREA_FLOWS)
    area_weights = get("area_weights")
    require(area_weights is None or isinstance(area_weights, (str, Mapping)), fields["area_weights"],
            f"got {area_weights!r}", "'lut=1,ff=0.5,...' or a table of weights")
    noise_range = None
    if get("noise_range_lsb") is not None:
        raw_range = get("noise_range_lsb")
        if isinstance(raw_range, str):
            raw_range = raw_range.replace(":", ",")
        lo_hi = number_list(fields["noise_range_lsb"], raw_range, 0.0, open_lo=True)
        require(len(lo_hi) == 2 and lo_hi[0] < lo_hi[1], fields["noise_range_lsb"], f"got {raw_range!r}",
                "two noise levels LO:HI in LSBs, 0 < LO < HI")
        n_lv = integer(fields["noise_range_points"], get("noise_range_points"), 2, 64, text=True)
        noise_range = tuple(float(x) for x in np.geomspace(lo_hi[0], lo_hi[1], n_lv))
    snr = number_list(fields["snr_db"], get("snr_db"))
    sw = integer_list(fields["swerling"], get("swerling"), 0, 1)
    pd = number(fields["pd"], get("pd"), 0.0, 1.0, open_lo=True, open_hi=True, text=True)
    trials = integer(fields["mc_trials"], get("mc_trials"), 0, text=True)
    conf = number(fields["confidence"], get("confidence"), 0.0, 1.0, open_lo=True, open_hi=True, text=True)
    seed = integer(fields["seed"], get("seed"), 0, text=True)
    max_loss = number(fields["max_loss_db"], get("max_loss_db"), 0.0, text=True, unit="of dB")
    tol = number(fields["pfa_tolerance"], get("pfa_tolerance"), 0.0, text=True,
                 unit="(relative tolerance: 0.1 = Pfa within +-10% of the design)")
    design_pfa = spec.design_pfa if spec.design_pfa is not None else td.pfa_from_alpha(
        spec.kind, spec.n_ref, spec.alpha, spec.rank)
    require(pd > design_pfa, fields["pd"], f"got {pd}", f"a Pd above the design Pfa {design_pfa:.3g}")
    swept = tuple(a for a in AXES if len(axes[a]) > 1)
    given = tuple(a for a in AXES if a in values)
    return StudyConfig(axes=axes, swept=swept, fields=fields, noise_scaling=scaling, snr_db=snr, pd=pd,
                       swerling=sw, mc_trials=trials, confidence=conf, seed=seed, max_loss_db=max_loss,
                       pfa_tolerance=tol, design_pfa=float(design_pfa), base_input_bits=spec.input_bits,
                       retune=retune, noise_range=noise_range, given=given, area_flow=area_flow,
                       area_weights=dict(area_weights) if isinstance(area_weights, Mapping) else area_weights)


# --------------------------------------------------------------------------
# Grid points
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class SweepPoint:
    """One grid point: its values, the noise level it runs at, and its block spec (as TOML sections)."""

    index: int
    values: dict
    noise_lsb: float
    spec_data: dict = field(repr=False)
    spec_input_bits: int = 0


def _base_data(spec: BlockSpec) -> dict:
    """The spec as a mapping to vary: automatic widths left to be re-derived per point."""
    d = spec.to_dict(resolved=True)
    fx = d["fixed"]
    if fx["sum_bits"] == spec.side_sum_bits:
        fx.pop("sum_bits")
    probe = dict(d, fixed={k: v for k, v in fx.items() if k != "threshold_bits"})
    try:
        auto_t = spec_from_dict(probe).threshold_bits
    except SpecError:
        auto_t = None
    if fx["threshold_bits"] == auto_t:
        fx.pop("threshold_bits")
    d.pop("study", None)
    return d


def sweep_points(spec: BlockSpec, cfg: StudyConfig) -> list[SweepPoint]:
    """Every grid point with its validated block spec.

    Raises
    ------
    SpecError
        When a combination of sweep values makes an invalid block (e.g. alpha
        quantises to 0 with too few fraction bits), naming the sweep field and
        value and the spec's own complaint.
    """
    base = _base_data(spec)
    points = []
    for i, combo in enumerate(itertools.product(*(cfg.axes[a] for a in AXES))):
        values = dict(zip(AXES, combo))
        d = {k: (dict(v) if isinstance(v, dict) else v) for k, v in base.items()}
        for a in FIXED_AXES:
            if a in AUTO_AXES and values[a] == 0:
                d["fixed"].pop(a, None)
            else:
                d["fixed"][a] = values[a]
        try:
            s = spec_from_dict(d)
        except SpecError as exc:
            raise _sweep_error(exc, values, cfg) from None
        noise = values["noise_level_lsb"]
        if cfg.noise_scaling == "track":
            noise = noise * 2.0 ** (s.input_bits - cfg.base_input_bits)
        points.append(SweepPoint(i, values, float(noise), d, s.input_bits))
    return points


def _sweep_error(exc: SpecError, values: dict, cfg: StudyConfig) -> SpecError:
    """The error of an invalid grid point, naming the option or ``[study]`` field whose value caused it.

    The spec names its own field (``fixed.alpha_frac_bits``); when the user
    set that axis (on the command line or in ``[study]``) the error names
    that setting, else the first axis the user set, else the spec's field.
    """
    axis = exc.field[len("fixed."):] if exc.field.startswith("fixed.") else None
    if axis in FIXED_AXES and axis in cfg.given:
        culprit = axis
    else:
        culprit = next((a for a in cfg.given if a in FIXED_AXES), None)
    where = ", ".join(f"{a}={values[a]}" for a in FIXED_AXES if a in cfg.given) or "the spec's values"
    if culprit is None:
        return SpecError(exc.field, exc.problem, exc.allowed)
    return SpecError(cfg.fields[culprit], f"sweep value {values[culprit]!r} ({where}) makes an invalid "
                     f"block: {exc.field}: {exc.problem}", exc.allowed)


def point_seed(seed: int, index: int) -> np.random.SeedSequence:
    """The Monte Carlo seed of grid point ``index``: ``SeedSequence(seed, spawn_key=(index,))``."""
    return np.random.SeedSequence(seed, spawn_key=(index,))


# --------------------------------------------------------------------------
# One point
# --------------------------------------------------------------------------


def cost_bits(values: Mapping[str, Any]) -> int:
    """Cost of a point: ``input_bits + alpha_frac_bits + threshold_frac_bits``."""
    return int(values["input_bits"]) + int(values["alpha_frac_bits"]) + int(values["threshold_frac_bits"])


def _snr_needed(law, target: float, swerling: int) -> float:
    """SNR (dB) at which the pipeline's exact Pd reaches ``target``; inf when it never does."""
    if law.pd_limit() <= target:
        return math.inf

    def f(db):
        return law.pd(db, swerling) - target

    lo, hi = SNR_SEARCH_DB[0], 20.0
    if f(lo) >= 0:
        return -math.inf
    while f(hi) < 0:
        hi += 20.0
        if hi > SNR_SEARCH_DB[1]:
            return math.inf
    return float(optimize.brentq(f, lo, hi, xtol=1e-6, rtol=1e-12, maxiter=200))


def _snr_key(snr: float) -> str:
    return f"{snr:g}dB"


def evaluate_point(task: dict) -> dict:
    """All metrics of one grid point (module docstring); runs in a worker process.

    Parameters
    ----------
    task : dict
        ``point`` (:class:`SweepPoint` fields), ``config`` (:meth:`StudyConfig.to_dict`)
        and ``float_snr_db`` (float SNR needed at the design Pfa, per Swerling case).

    Returns
    -------
    dict
        ``row``: the CSV row (an ordered dict of scalars); ``curve``: the
        pipeline's Pd against SNR (``snr_db``, ``pd_sw0``, ``pd_sw1``) for plots.
    """
    pt, cfg = task["point"], task["config"]
    spec_data = pt["spec_data"]
    spec = spec_from_dict(spec_data)
    kind, n, rank = spec.kind, spec.n_ref, spec.rank
    noise = pt["noise_lsb"]
    design = cfg["design_pfa"]
    alpha = task["design_alpha"]
    hint = min(design, 1e-6)
    conv = pt["values"]["input_converter"]
    rounded_a = spec.alpha_int
    if pt["values"]["constant"] == "retuned":
        tuned = retune_constant(spec, spec_data, noise, design, cfg["retune"], pfa_hint=hint, converter=conv)
        spec = tuned.spec
        spec_data = spec.to_dict(resolved=True)
        spec_data.pop("study", None)
        for a in AUTO_AXES:  # keep automatic widths automatic
            if a not in pt["spec_data"]["fixed"]:
                spec_data["fixed"].pop(a, None)
        pfa_rounded, met = tuned.pfa_rounded, tuned.met
    law = trigger_law(spec, noise, pfa_hint=hint, converter=conv)
    pfa = law.pfa()
    if pt["values"]["constant"] != "retuned":
        pfa_rounded, met = pfa, None
    row: dict[str, Any] = {"index": pt["index"]}
    row.update(pt["values"])
    row["noise_lsb"] = noise
    row["cost_bits"] = cost_bits(pt["values"])
    row["alpha_int"] = spec.alpha_int
    row["alpha_int_rounded"] = rounded_a
    row["pfa_ratio_rounded"] = pfa_rounded / design
    row["retune_met"] = "n/a" if met is None else bool(met)
    row["alpha_nonzero_digits"] = len(spec.alpha_digits)
    row["threshold_bits_used"] = spec.threshold_bits
    row["sum_bits_used"] = spec.sum_bits
    row["realised_alpha"] = spec.realised_alpha
    row["alpha_rel_err"] = spec.realised_alpha / alpha - 1.0
    row["pfa_design"] = design
    row["pfa_float_realised"] = td.pfa_from_alpha(kind, n, spec.realised_alpha, rank)
    row["pfa_exact"] = pfa
    row["pfa_exact_err_bound"] = law.pfa_error_bound()
    row["pfa_ratio"] = pfa / design
    # CFAR check: the same pipeline with the noise 3 dB higher (a CFAR detector keeps its Pfa).
    pfa_up = trigger_law(spec, 2.0 * noise, pfa_hint=hint, converter=conv).pfa()
    row["pfa_exact_noise_x2"] = pfa_up
    row["pfa_ratio_noise_x2"] = pfa_up / design
    trials = cfg["mc_trials"]
    if trials:
        rng = np.random.default_rng(point_seed(cfg["seed"], pt["index"]))
        mc = run_trials(spec, noise, trials, rng, converter=conv)
        lo, hi = clopper_pearson(mc.detections, mc.trials, cfg["confidence"])
        row.update(mc_trials=mc.trials, mc_false_alarms=mc.detections, mc_pfa=mc.rate, mc_ci_low=lo, mc_ci_high=hi,
                   mc_agrees=bool(lo - row["pfa_exact_err_bound"] <= pfa <= hi + row["pfa_exact_err_bound"]),
                   thr_err_total_mean_lsb=mc.err_mean_lsb, thr_err_total_rms_lsb=mc.err_rms_lsb,
                   thr_err_total_max_lsb=mc.err_max_lsb)
    else:
        row.update(mc_trials=0, mc_false_alarms=0, mc_pfa=math.nan, mc_ci_low=math.nan, mc_ci_high=math.nan,
                   mc_agrees=True, thr_err_total_mean_lsb=math.nan, thr_err_total_rms_lsb=math.nan,
                   thr_err_total_max_lsb=math.nan)
    row["thr_err_arith_mean_lsb"] = law.arith_err_mean_lsb
    row["thr_err_arith_rms_lsb"] = law.arith_err_rms_lsb
    row["thr_err_arith_max_lsb"] = law.arith_err_max_lsb
    row["saturation_rate"] = law.saturation
    row["clip_rate_noise"] = clip_rate(noise, spec.input_bits, converter=conv)
    snr_top = 10.0 ** (max(cfg["snr_db"]) / 10.0)
    for sw in cfg["swerling"]:
        row[f"clip_rate_target_sw{sw}"] = clip_rate(noise, spec.input_bits, snr_top, sw, converter=conv)
    for sw in cfg["swerling"]:
        need = _snr_needed(law, cfg["pd"], sw)
        ref_equal = td.required_snr_db(kind, n, pfa, cfg["pd"], sw, rank) if 0 < pfa < cfg["pd"] else math.nan
        row[f"snr_fixed_sw{sw}_db"] = need
        row[f"snr_float_sw{sw}_db"] = task["float_snr_db"][sw]
        row[f"loss_sw{sw}_db"] = need - ref_equal
        row[f"snr_shift_sw{sw}_db"] = need - task["float_snr_db"][sw]
    if cfg["noise_range"]:
        row.update(_range_columns(spec, cfg, task["range_levels"], hint, conv))
    for sw in cfg["swerling"]:
        for snr in cfg["snr_db"]:
            row[f"pd_fixed_sw{sw}_{_snr_key(snr)}"] = law.pd(snr, sw)
            row[f"pd_float_sw{sw}_{_snr_key(snr)}"] = td.pd(kind, n, alpha, snr, sw, rank)
    grid = curve_snr_grid(cfg["snr_db"])
    curve = {"snr_db": grid}
    for sw in cfg["swerling"]:
        curve[f"pd_sw{sw}"] = [law.pd(x, sw) for x in grid]
    return {"row": row, "curve": curve, "spec_data": spec_data}


def _range_columns(spec: BlockSpec, cfg: dict, levels: list, hint: float, conv: str) -> dict:
    """Pfa ratio and loss at every noise level of the range: the worst case and where it occurs."""
    design = cfg["design_pfa"]
    ratios, losses = [], {sw: [] for sw in cfg["swerling"]}
    for lv in levels:
        law = trigger_law(spec, lv, pfa_hint=hint, converter=conv)
        pfa = law.pfa()
        ratios.append(pfa / design)
        for sw in cfg["swerling"]:
            need = _snr_needed(law, cfg["pd"], sw)
            ref = td.required_snr_db(spec.kind, spec.n_ref, pfa, cfg["pd"], sw, spec.rank) if 0 < pfa < cfg["pd"] \
                else math.nan
            losses[sw].append(need - ref)
    dev = [abs(r - 1.0) for r in ratios]
    worst = int(np.argmax(dev))
    out = {"range_pfa_ratio_min": min(ratios), "range_pfa_ratio_max": max(ratios),
           "range_worst_pfa_noise_lsb": levels[worst]}
    for sw in cfg["swerling"]:
        vals = [v if not math.isnan(v) else math.inf for v in losses[sw]]
        i = int(np.argmax(vals))
        out[f"range_loss_sw{sw}_db"] = vals[i]
        out[f"range_worst_loss_sw{sw}_noise_lsb"] = levels[i]
    return out


def curve_snr_grid(snr_db) -> list[float]:
    """SNRs (dB) of the Pd curves: 1 dB steps from 6 dB below to 6 dB above the table's SNRs."""
    lo, hi = math.floor(min(snr_db)) - 6.0, math.ceil(max(snr_db)) + 6.0
    return [float(x) for x in np.arange(lo, hi + 0.5, 1.0)]


# --------------------------------------------------------------------------
# The whole study
# --------------------------------------------------------------------------


@dataclass
class StudyResult:
    """Rows (one per grid point, in grid order), Pd curves, the configuration and the recommendation."""

    spec: BlockSpec
    config: StudyConfig
    rows: list
    curves: list
    recommended: int | None
    float_snr_db: dict
    specs_data: list = field(default_factory=list)
    area_info: dict | None = None

    def meets_budget(self, row: Mapping[str, Any]) -> bool:
        return _meets(row, self.config)


def _meets(row: Mapping[str, Any], cfg: StudyConfig) -> bool:
    losses = [row[f"loss_sw{sw}_db"] for sw in cfg.swerling]
    ok_loss = all(math.isfinite(v) and v <= cfg.max_loss_db for v in losses)
    ok_pfa = abs(row["pfa_ratio"] - 1.0) <= cfg.pfa_tolerance
    ok_cfar = abs(row["pfa_ratio_noise_x2"] - 1.0) <= cfg.pfa_tolerance
    ok_range = True
    if cfg.noise_range:
        ok_range = (abs(row["range_pfa_ratio_min"] - 1.0) <= cfg.pfa_tolerance
                    and abs(row["range_pfa_ratio_max"] - 1.0) <= cfg.pfa_tolerance
                    and all(math.isfinite(row[f"range_loss_sw{sw}_db"]) and row[f"range_loss_sw{sw}_db"]
                            <= cfg.max_loss_db for sw in cfg.swerling))
    return bool(ok_loss and ok_pfa and ok_cfar and ok_range)


_ROUNDING_COST = {m: i for i, m in enumerate(("floor", "half-up", "half-even"))}


def recommend(rows: list, cfg: StudyConfig) -> int | None:
    """Index of the cheapest row that meets the budget, or None when none does.

    Cheapest: the smallest area (``area_luteq``, LUT-equivalents) when the
    rows carry one, then the smallest :func:`cost_bits`; ties go to fewer
    non-zero digits in the constant (fewer adders), then to the cheaper
    rounding (floor, half-up, half-even), then to the smaller worst loss.
    """
    ok = [r for r in rows if _meets(r, cfg)]
    if not ok:
        return None

    def key(r):
        worst = max(r[f"loss_sw{sw}_db"] for sw in cfg.swerling)
        area = r.get("area_luteq", 0.0)
        return (area, r["cost_bits"], r["alpha_nonzero_digits"], _ROUNDING_COST.get(r["rounding"], 9), worst,
                r["index"])

    return min(ok, key=key)["index"]


def float_snr_needed(spec: BlockSpec, cfg: StudyConfig) -> dict:
    """SNR (dB) the float detector designed for the design Pfa needs for the target Pd, per Swerling case."""
    return {sw: td.required_snr_db(spec.kind, spec.n_ref, cfg.design_pfa, cfg.pd, sw, spec.rank)
            for sw in cfg.swerling}


def _point_task(p: SweepPoint, cfg: StudyConfig, cfg_dict: dict, float_snr: dict, alpha: float) -> dict:
    levels = []
    if cfg.noise_range:
        scale = 2.0 ** (p.spec_input_bits - cfg.base_input_bits) if cfg.noise_scaling == "track" else 1.0
        levels = [lv * scale for lv in cfg.noise_range]
    return {"point": {"index": p.index, "values": p.values, "noise_lsb": p.noise_lsb, "spec_data": p.spec_data},
            "config": cfg_dict, "float_snr_db": float_snr, "design_alpha": alpha, "range_levels": levels}


def run_study(spec: BlockSpec, cfg: StudyConfig, *, workers: int | None = None, scheduler: str | None = None,
              progress: bool = True, area: Callable[[list], list] | None = None) -> StudyResult:
    """Evaluate every grid point and pick the recommendation.

    Parameters
    ----------
    spec : BlockSpec
        The base block.
    cfg : StudyConfig
        From :func:`study_config`.
    workers : int, optional
        Local worker processes (default: the number of CPU cores; 1 runs in
        this process).
    scheduler : str, optional
        Address of a running Dask distributed scheduler; the points are then
        submitted there instead (``distributed.Client(scheduler)``).
    progress : bool
        Show a tqdm progress bar on stderr.
    area : callable, optional
        Area costing: takes the list of block specs of the points (as run,
        with the re-tuned constant where there is one) and returns one dict
        of columns per spec, among them ``area_luteq`` (the area measure the
        recommendation minimises). :class:`hdl_tb.area_cost.AreaCoster` is
        one; refmodel does not import it. An object with a ``describe()``
        method has it called for the report.

    Returns
    -------
    StudyResult
        Identical whichever way the points ran.
    """
    from tqdm import tqdm

    spec = interior_twin(spec)  # a map block is studied as its 1D arithmetic twin (refmodel/map_spec.py)
    points = sweep_points(spec, cfg)
    float_snr = float_snr_needed(spec, cfg)
    cfg_dict = cfg.to_dict()
    tasks = [_point_task(p, cfg, cfg_dict, float_snr, spec.alpha) for p in points]
    results: list[dict | None] = [None] * len(tasks)
    bar = tqdm(total=len(tasks), desc="study", unit="point", file=sys.stderr, disable=not progress)
    try:
        if scheduler is not None:
            _run_dask(tasks, results, scheduler, bar)
        else:
            n_workers = workers if workers is not None else (os.cpu_count() or 1)
            require(isinstance(n_workers, int) and n_workers >= 1, "--workers", f"got {n_workers!r}",
                    "an integer >= 1")
            if n_workers == 1 or len(tasks) == 1:
                for i, t in enumerate(tasks):
                    results[i] = evaluate_point(t)
                    bar.update(1)
            else:
                with ProcessPoolExecutor(max_workers=min(n_workers, len(tasks))) as pool:
                    futs = {pool.submit(evaluate_point, t): i for i, t in enumerate(tasks)}
                    for f in as_completed(futs):
                        results[futs[f]] = f.result()
                        bar.update(1)
    finally:
        bar.close()
    rows = [r["row"] for r in results]
    curves = [r["curve"] for r in results]
    specs_data = [r["spec_data"] for r in results]
    area_info = None
    if area is not None:
        cols = area([spec_from_dict(d) for d in specs_data])
        for r, c in zip(rows, cols):
            r.update(c)
        describe = getattr(area, "describe", None)
        area_info = describe() if callable(describe) else {}
    best = recommend(rows, cfg)
    for r in rows:
        r["meets_budget"] = _meets(r, cfg)
        r["recommended"] = r["index"] == best
    return StudyResult(spec, cfg, rows, curves, best, float_snr, specs_data, area_info)


def _run_dask(tasks: list, results: list, address: str, bar) -> None:
    try:
        from distributed import Client
        from distributed import as_completed as dask_completed
    except ImportError:  # pragma: no cover - dask is a dependency
        raise SpecError("--scheduler", "dask.distributed is not installed", "a local run (omit --scheduler)") from None
    try:
        client = Client(address, timeout=DASK_CONNECT_TIMEOUT)
    except (OSError, TimeoutError, ValueError) as exc:
        raise SpecError("--scheduler", f"cannot reach {address!r} ({exc})",
                        "the address of a running Dask scheduler, e.g. tcp://host:8786") from None
    try:
        futs = client.map(evaluate_point, tasks, pure=False)
        index = {f.key: i for i, f in enumerate(futs)}
        for f in dask_completed(futs):
            results[index[f.key]] = f.result()
            bar.update(1)
    finally:
        client.close()
