"""The manifest: ``manifest.json``, the sealed description of one vector set.

It records what the set was made from (the resolved block spec, the vector
settings, the seed, the tool version), what the words mean (widths and field
positions, latency) and what the folder holds (per source: frames, samples and
where they start; per file: name, role, format, word width, line count and
SHA-256). The field-by-field reference is ``docs/vectors.md``.

The manifest seals itself: ``manifest_sha256`` is the SHA-256 (FIPS 180-4,
through :mod:`hashlib`) of the canonical JSON of every other field (keys
sorted, no whitespace, ASCII), so an edit to any field is detected even where
nothing else depends on it. The file is written in exactly one form
(:func:`render`), so together the seal and the form fix every byte: an edit
that keeps the meaning (``1E-06`` for ``1e-06``, other indentation, CRLF
line ends) is caught too (:func:`form_difference`).
"""

from __future__ import annotations

import hashlib
import json
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

from refmodel.block_spec import BlockSpec
from refmodel.fixedpoint.word_format import output_field_offsets

NAME = "manifest.json"
SET_FORMAT = "cfarvec-vector-set"
SET_FORMAT_VERSION = 1
DIGEST_KEY = "manifest_sha256"


def tool_version() -> str:
    """The installed cfarvec version (``"0.0.0+unknown"`` in a bare source tree)."""
    try:
        return version("cfarvec")
    except PackageNotFoundError:
        return "0.0.0+unknown"


def word_layout(spec: BlockSpec) -> dict:
    """Widths and field positions ``[lsb, width]`` of the stimulus and output words."""
    return {
        "stimulus": {"bits": spec.input_word_bits,
                     "fields": {"sample": [0, spec.input_bits], "last": [spec.input_bits, 1]}},
        "expected": {"bits": spec.output_bits,
                     "fields": {k: list(v) for k, v in output_field_offsets(spec).items()}},
    }


def digest(manifest: dict) -> str:
    """SHA-256 of the canonical JSON of ``manifest`` without its own digest field."""
    body = {k: v for k, v in manifest.items() if k != DIGEST_KEY}
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def build_manifest(spec: BlockSpec, settings: dict, sources: list[dict], cases: list[dict],
                   files: list[dict]) -> dict:
    """Assemble a sealed manifest.

    Parameters
    ----------
    spec : BlockSpec
        The block the set is for.
    settings : dict
        The resolved ``[vectors]`` settings (seed included).
    sources : list of dict
        Per source: ``name``, ``frames``, ``samples``, ``first_frame``, ``first_line``.
    cases : list of dict
        Per directed case: ``label``, ``first_frame``, ``frames``.
    files : list of dict
        Per file: ``name``, ``role``, ``format``, ``word_bits``, ``lines``, ``sha256``.

    Returns
    -------
    dict
        The manifest, ``manifest_sha256`` included.
    """
    m: dict[str, Any] = {
        "format": SET_FORMAT,
        "format_version": SET_FORMAT_VERSION,
        "tool_version": tool_version(),
        "seed": settings["seed"],
        "spec": spec.to_dict(resolved=True),
        "design_pfa": spec.design_pfa,  # the spec resolves it to spec.detector.alpha
        "derived": spec.derived(),
        "latency_cycles": spec.latency_cycles,
        "words": word_layout(spec),
        "vectors": settings,
        "totals": {"frames": sum(s["frames"] for s in sources), "samples": sum(s["samples"] for s in sources)},
        "sources": sources,
        "corner_cases": cases,
        "files": files,
    }
    m[DIGEST_KEY] = digest(m)
    return m


def render(manifest: dict) -> bytes:
    """The exact bytes of ``manifest.json``: indented by 2, keys sorted, ASCII, LF line ends, final newline."""
    return (json.dumps(manifest, indent=2, sort_keys=True, ensure_ascii=True, allow_nan=False) + "\n").encode("ascii")


def write_manifest(folder: Path, manifest: dict) -> None:
    """Write ``manifest.json`` in the one form :func:`render` gives."""
    (Path(folder) / NAME).write_bytes(render(manifest))


def read_manifest(folder: Path) -> dict:
    """Parse ``manifest.json``.

    Raises
    ------
    OSError
        When it cannot be read.
    ValueError
        When it is not a JSON object, or nested too deep to parse
        (``json.JSONDecodeError`` is a ``ValueError``).
    """
    return parse_manifest((Path(folder) / NAME).read_bytes())


def parse_manifest(raw: bytes) -> dict:
    """Parse the bytes of ``manifest.json`` (see :func:`read_manifest` for the errors)."""
    try:
        data = json.loads(raw)
    except RecursionError:
        raise ValueError("nested too deep") from None
    if not isinstance(data, dict):
        raise ValueError("not a JSON object")
    return data


def form_difference(raw: bytes, manifest: dict) -> int | None:
    """First line (1-based) where the bytes ``raw`` differ from :func:`render` of what they parse to.

    ``None`` when ``raw`` is exactly the written form. A manifest that cannot
    be rendered (a NaN, a value nested too deep) differs at line 1.
    """
    try:
        want = render(manifest)
    except (ValueError, TypeError, RecursionError):
        return 1
    if raw == want:
        return None
    n = min(len(raw), len(want))
    first = next((i for i in range(n) if raw[i] != want[i]), n)
    return raw[:first].count(b"\n") + 1
