"""Stimulus and output words: the pipeline's result arrays and their bit packing.

Bit positions are those of ``docs/bit-true.md`` section 8 (output) and
section 1 (input). Packed words are ``uint64`` numpy arrays.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..block_spec import BlockSpec


@dataclass(frozen=True)
class PipelineOutput:
    """One output word per input sample, as separate integer fields.

    Attributes
    ----------
    cut : numpy.ndarray of int64
        The CUT sample.
    threshold : numpy.ndarray of int64
        Threshold word ``T`` (``threshold_bits`` wide, ``threshold_frac_bits`` fraction bits).
    det : numpy.ndarray of bool
        Detection flag.
    valid : numpy.ndarray of bool
        Window-valid flag (the whole window lies inside the frame).
    last : numpy.ndarray of bool
        Last marker (set on each frame's last CUT).
    """

    cut: np.ndarray
    threshold: np.ndarray
    det: np.ndarray
    valid: np.ndarray
    last: np.ndarray

    def __len__(self) -> int:
        return int(self.cut.shape[0])

    @staticmethod
    def concat(parts: list["PipelineOutput"]) -> "PipelineOutput":
        """Join outputs of consecutive chunks."""
        if not parts:
            z = np.zeros(0, dtype=np.int64)
            b = np.zeros(0, dtype=bool)
            return PipelineOutput(z, z.copy(), b, b.copy(), b.copy())
        return PipelineOutput(*(np.concatenate([getattr(p, f) for p in parts]) for f in FIELDS))

    def equals(self, other: "PipelineOutput") -> bool:
        """True when every field of every word agrees."""
        return len(self) == len(other) and all(np.array_equal(getattr(self, f), getattr(other, f)) for f in FIELDS)


FIELDS = ("cut", "threshold", "det", "valid", "last")


def pack_input(spec: BlockSpec, samples: np.ndarray, last: np.ndarray) -> np.ndarray:
    """Stimulus words: sample in ``[W_in-1:0]``, last marker in bit ``W_in``."""
    return np.asarray(samples, dtype=np.uint64) | (np.asarray(last, dtype=np.uint64) << np.uint64(spec.input_bits))


def unpack_input(spec: BlockSpec, words: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Inverse of :func:`pack_input`: ``(samples int64, last bool)``."""
    w = np.asarray(words, dtype=np.uint64)
    mask = np.uint64((1 << spec.input_bits) - 1)
    return (w & mask).astype(np.int64), ((w >> np.uint64(spec.input_bits)) & np.uint64(1)).astype(bool)


def output_field_offsets(spec: BlockSpec) -> dict[str, tuple[int, int]]:
    """``{field: (lsb, width)}`` of the output word."""
    w_in, w_t = spec.input_bits, spec.threshold_bits
    return {
        "cut": (0, w_in),
        "threshold": (w_in, w_t),
        "det": (w_in + w_t, 1),
        "valid": (w_in + w_t + 1, 1),
        "last": (w_in + w_t + 2, 1),
    }


def pack_output(spec: BlockSpec, out: PipelineOutput) -> np.ndarray:
    """Output words (``uint64``) from the fields of ``out``."""
    word = np.zeros(len(out), dtype=np.uint64)
    for name, (lsb, _width) in output_field_offsets(spec).items():
        word |= np.asarray(getattr(out, name), dtype=np.uint64) << np.uint64(lsb)
    return word


def unpack_output(spec: BlockSpec, words: np.ndarray) -> PipelineOutput:
    """Inverse of :func:`pack_output`."""
    w = np.asarray(words, dtype=np.uint64)
    fields = {}
    for name, (lsb, width) in output_field_offsets(spec).items():
        v = (w >> np.uint64(lsb)) & np.uint64((1 << width) - 1)
        fields[name] = v.astype(bool) if width == 1 and name != "cut" and name != "threshold" else v.astype(np.int64)
    return PipelineOutput(**fields)
