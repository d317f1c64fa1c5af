"""Area of the reference core for many parameter sets: Yosys runs in parallel, cached on disk.

:class:`AreaCoster` synthesises ``hdl_tb/rtl/cfar_stream.v``
(:func:`hdl_tb.synthesis.synthesize`) once per distinct core parameter set
(:func:`hdl_tb.core_params.core_parameters`) with the iCE40 or Xilinx
7-series flow, runs the missing sets in parallel (one Yosys process each,
``workers`` at a time) and keeps every result in a cache folder, one JSON file
per set named by a hash of what decides the netlist: the bytes of the RTL
sources, the parameters, the flow's Yosys command and the Yosys version. A
repeated study with the same points reads the cache and starts no Yosys.

Each result holds LUTs, flip-flops, carries, DSP blocks, shift-register LUTs
(SRLs), block RAMs, LUT RAMs and memory bits, and the **area** in
LUT-equivalents, the weighted sum

    area = w_lut LUTs + w_ff FFs + w_carry carries + w_srl SRLs + w_dsp DSPs + w_mem memory bits      (1)

with the weights of :data:`DEFAULT_WEIGHTS` unless the user sets them
(:func:`parse_weights`). The defaults are a convention (common practice, no
source): a LUT counts 1; a flip-flop 0.5 (a Xilinx 7-series slice holds 4
LUTs and 8 flip-flops; an iCE40 logic cell one LUT4 and one flip-flop, so
there a flip-flop beside an unrelated LUT is nearly free -- set ``ff=1`` to
count iCE40 logic cells that hold only a flip-flop); a carry cell 0 (it sits
beside its LUT in the same slice or logic cell); an SRL 1 (it takes a LUT of
the slice); a DSP block 100 (about the LUTs of the multiplier it replaces);
a memory bit 1/64 (a 64-bit LUT RAM is one LUT).

The refmodel study takes the coster as a plain callable (a list of block
specs in, one dict of columns per spec out): data flows refmodel -> vectors
-> hdl_tb, so refmodel never imports this module; :mod:`cfarvec.cmd_study`
builds the coster and hands it in.

Several parameter sets in one Yosys process (reading the cell library once)
would save about a quarter of the Xilinx flow's time, but the netlists then
differ by a few LUTs from those of a fresh process (tried with Yosys 0.23):
each set gets its own process so that the counts equal a direct run.

Typical use::

    from hdl_tb.area_cost import AreaCoster
    coster = AreaCoster(flow="ice40", workers=2)
    costs = coster.cost_many([spec_a, spec_b])   # one dict per spec
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Iterable, Mapping, Sequence

from refmodel.block_spec import BlockSpec, spec_from_dict
from refmodel.errors import SpecError, require
from refmodel.spec_fields import number

from .core_params import CORE_SOURCES, CORE_TOP, MAP_CORE_SOURCES, MAP_CORE_TOP, core_parameters
from .synthesis import FLOWS, SynthesisError, find_yosys, synthesize

__all__ = ["AREA_FLOWS", "AreaCoster", "DEFAULT_WEIGHTS", "default_cache_dir", "parse_weights", "weighted_area"]

#: Flows whose cells map to area classes (the generic flow has gates, not LUTs).
AREA_FLOWS = ("ice40", "xilinx")
#: Default flow of the study.
DEFAULT_FLOW = "ice40"
#: Weights of equation (1), LUT-equivalents per unit (module docstring).
DEFAULT_WEIGHTS = {"lut": 1.0, "ff": 0.5, "carry": 0.0, "srl": 1.0, "dsp": 100.0, "memory_bit": 1.0 / 64.0}
#: Which count each weight multiplies.
WEIGHT_COUNTS = {"lut": "luts", "ff": "flip_flops", "carry": "carries", "srl": "srls", "dsp": "dsps",
                 "memory_bit": "memory_bits"}
#: Counts kept per parameter set.
COUNTS = ("luts", "flip_flops", "carries", "dsps", "srls", "brams", "lutrams", "memory_bits", "cells")
#: Environment variable that overrides the default cache folder.
CACHE_ENV = "CFARVEC_AREA_CACHE"
#: Bumped when the cached record's layout changes.
CACHE_FORMAT = 1


def default_cache_dir() -> Path:
    """The cache folder: ``$CFARVEC_AREA_CACHE``, else ``$XDG_CACHE_HOME/cfarvec/area``, else ``~/.cache/cfarvec/area``."""
    if os.environ.get(CACHE_ENV):
        return Path(os.environ[CACHE_ENV])
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "cfarvec" / "area"


def parse_weights(text: str | Mapping[str, float] | None, field: str = "--area-weights") -> dict:
    """Weights of equation (1) from ``"lut=1,ff=0.5,dsp=100"`` (or a mapping); unnamed weights keep their default.

    Raises
    ------
    SpecError
        Naming ``field``: an unknown name, a missing ``=``, a value that is not a number >= 0.
    """
    out = dict(DEFAULT_WEIGHTS)
    if text is None:
        return out
    allowed = "comma-separated name=value pairs, names " + ", ".join(DEFAULT_WEIGHTS) + ", values >= 0"
    if isinstance(text, Mapping):
        items = list(text.items())
    else:
        require(isinstance(text, str) and text.strip() != "", field, f"got {text!r}", allowed)
        items = []
        for part in text.split(","):
            require("=" in part, field, f"got {part.strip()!r}", allowed)
            k, v = part.split("=", 1)
            items.append((k.strip(), v.strip()))
    for k, v in items:
        require(k in DEFAULT_WEIGHTS, field, f"unknown weight {k!r}", allowed)
        out[k] = number(field, v, 0.0, text=True)
    return out


def weighted_area(counts: Mapping[str, float], weights: Mapping[str, float]) -> float:
    """Equation (1): LUT-equivalents of one set of cell counts."""
    return float(sum(weights[w] * counts.get(c, 0) for w, c in WEIGHT_COUNTS.items()))


def _yosys_version() -> str:
    out = subprocess.run([find_yosys(), "-V"], capture_output=True, text=True).stdout.strip()
    return out or "unknown"


class AreaCoster:
    """Yosys area of the reference core per block spec, parallel and cached; a callable for the study.

    Parameters
    ----------
    flow : {"ice40", "xilinx"}
        Yosys flow (:data:`hdl_tb.synthesis.FLOWS`).
    weights : mapping or str, optional
        Weights of equation (1) (:func:`parse_weights`).
    cache_dir : path, optional
        Cache folder (default :func:`default_cache_dir`).
    workers : int, optional
        Yosys processes at a time (default: the number of CPU cores).
    sources : sequence of path, optional
        RTL files (default the reference core); part of the cache key.
    top : str
        Top module.
    progress : bool
        A tqdm progress bar on stderr while Yosys runs.

    Raises
    ------
    SpecError
        ``--area-flow`` not an area flow, Yosys missing (field ``synthesis``).
    """

    def __init__(self, flow: str = DEFAULT_FLOW, weights=None, cache_dir: str | Path | None = None,
                 workers: int | None = None, sources: Sequence[str | Path] | None = None, top: str = CORE_TOP,
                 progress: bool = False):
        require(flow in AREA_FLOWS, "--area-flow", f"got {flow!r}", ", ".join(AREA_FLOWS))
        self.flow = flow
        self.weights = parse_weights(weights)
        self.cache_dir = Path(cache_dir) if cache_dir is not None else default_cache_dir()
        self.workers = max(1, int(workers if workers is not None else (os.cpu_count() or 1)))
        self.sources = [Path(p).resolve() for p in (sources if sources is not None else CORE_SOURCES)]
        self.top = top
        self.progress = progress
        self._version = _yosys_version()
        digest = hashlib.sha256()
        for p in self.sources:
            digest.update(p.name.encode() + b"\0" + p.read_bytes() + b"\0")
        self._rtl_hash = digest.hexdigest()
        #: Sets synthesised by this object (cache misses) and read from the cache (hits).
        self.misses = 0
        self.hits = 0

    # ---- keys and cache --------------------------------------------------
    def key(self, params: Mapping[str, int]) -> str:
        """Cache key of one parameter set: sha256 of RTL bytes, parameters, flow command, Yosys version."""
        blob = json.dumps({"format": CACHE_FORMAT, "rtl": self._rtl_hash, "top": self.top,
                           "params": {k: int(v) for k, v in sorted(params.items())},
                           "flow": FLOWS[self.flow], "yosys": self._version}, sort_keys=True)
        return hashlib.sha256(blob.encode()).hexdigest()

    def _path(self, key: str) -> Path:
        return self.cache_dir / self.flow / f"{key}.json"

    def _read(self, key: str) -> dict | None:
        try:
            data = json.loads(self._path(key).read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        return data if isinstance(data, dict) and all(c in data for c in COUNTS) else None

    def _write(self, key: str, record: dict) -> None:
        path = self._path(key)
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            tmp = path.with_suffix(f".tmp{os.getpid()}")
            tmp.write_text(json.dumps(record, sort_keys=True), encoding="utf-8")
            os.replace(tmp, path)
        except OSError:  # a read-only cache only costs time
            pass

    # ---- synthesis -------------------------------------------------------
    def _synth(self, params: dict) -> dict:
        try:
            report = synthesize(params, self.flow, sources=self.sources, top=self.top)
        except SynthesisError as exc:
            raise SpecError("--area-flow", f"Yosys failed on the core for {params}: {str(exc).splitlines()[0]}",
                            "a parameter set the core accepts, or --no-area") from None
        s = report.summary()
        return {c: int(s[c]) for c in COUNTS}

    def counts_many(self, param_sets: Iterable[Mapping[str, int]]) -> list[dict]:
        """Cell counts per parameter set (cache first, the missing distinct sets synthesised in parallel)."""
        param_sets = [dict(p) for p in param_sets]
        keys = [self.key(p) for p in param_sets]
        found = {}
        todo = {}
        for k, p in zip(keys, param_sets):
            if k in found or k in todo:
                continue
            rec = self._read(k)
            if rec is not None:
                found[k] = rec
                self.hits += 1
            else:
                todo[k] = p
        if todo:
            from tqdm import tqdm

            bar = tqdm(total=len(todo), desc=f"area ({self.flow})", unit="core", file=sys.stderr,
                       disable=not self.progress)
            try:
                with ThreadPoolExecutor(max_workers=min(self.workers, len(todo))) as pool:
                    for k, rec in zip(todo, pool.map(self._synth, todo.values())):
                        self._write(k, rec)
                        found[k] = rec
                        self.misses += 1
                        bar.update(1)
            finally:
                bar.close()
        return [dict(found[k]) for k in keys]

    def cost_many(self, specs: Iterable[BlockSpec]) -> list[dict]:
        """Area columns per block spec: ``area_<count>`` for every count, ``area_luteq`` (equation (1)), ``area_key``."""
        specs = list(specs)
        params = [core_parameters(s) for s in specs]
        out = []
        for p, counts in zip(params, self.counts_many(params)):
            row = {f"area_{c}": counts[c] for c in COUNTS}
            row["area_luteq"] = weighted_area(counts, self.weights)
            row["area_key"] = self.key(p)[:12]
            out.append(row)
        return out

    def __call__(self, specs: Iterable[BlockSpec]) -> list[dict]:
        return self.cost_many(specs)

    def describe(self) -> dict:
        """Flow, weights and cache folder, for reports."""
        return {"flow": self.flow, "flow_command": FLOWS[self.flow].format(top=self.top), "weights": dict(self.weights),
                "cache_dir": str(self.cache_dir), "yosys": self._version}


class MapAreaCoster:
    """Area of a map block's study points, on the map core ``cfar_map``.

    The study varies the arithmetic of a map block's 1D twin
    (:func:`refmodel.map_spec.interior_twin`); each point's arithmetic
    (``[fixed]``, the constant, the pipeline stages) is put back into the map
    spec and that map block is costed by an :class:`AreaCoster` of the map
    core. The map core derives its own sum width from the window, so a point's
    ``sum_bits`` does not reach it.

    Parameters
    ----------
    map_spec : refmodel.map_spec.MapSpec
        The block under study.
    **coster : optional
        :class:`AreaCoster` options (flow, weights, cache folder, workers,
        progress); sources and top are the map core's.
    """

    def __init__(self, map_spec, **coster):
        self.map_spec = map_spec
        self.coster = AreaCoster(sources=MAP_CORE_SOURCES, top=MAP_CORE_TOP, **coster)

    def map_point(self, twin: BlockSpec):
        """The map block with the arithmetic of one study point (its 1D twin ``twin``)."""
        data = self.map_spec.to_dict(resolved=True)
        det = dict(data["detector"])
        det.pop("design_pfa", None)
        det["alpha"] = twin.alpha
        data["detector"] = det
        data["fixed"] = {k: v for k, v in twin.to_dict(resolved=True)["fixed"].items() if k != "sum_bits"}
        data["stream"] = {**data.get("stream", {}), "pipeline_stages": twin.pipeline_stages}
        return spec_from_dict(data)

    def __call__(self, specs: Iterable[BlockSpec]) -> list[dict]:
        return self.coster.cost_many([self.map_point(s) for s in specs])

    def describe(self) -> dict:
        return self.coster.describe()
