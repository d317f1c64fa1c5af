"""Check a vector set: every hash, the manifest, and the expected words against the model.

:func:`check_vector_set` reads a set folder written by
:func:`vectors.vector_set.write_vector_set` and reports every disagreement it
finds as a :class:`Finding` (file, line, frame, index in the frame, field):

1. ``manifest.json`` parses, is sealed (its ``manifest_sha256`` matches, see
   :mod:`vectors.manifest`), is byte for byte in the one form it is written
   in (so a same-meaning edit is caught too), names a valid block spec, and
   its derived widths, latency and word layout are what that spec gives.
2. Every listed file exists with the listed line count and SHA-256
   (FIPS 180-4, through :mod:`hashlib`), and the folder holds nothing else.
3. Content, streamed in chunks: the stimulus is well formed (each frame at
   least one window long, the stream ends on a last marker); every other
   format carries the same words as the ``hex`` file; the CUT and last
   fields of the expected words mirror the stimulus line for line; and the
   bit-accurate model (:mod:`refmodel.fixedpoint.pipeline_fast`) run on the stimulus
   gives every expected word, field for field.

Content checks stop at the first difference, which is reported before any
hash mismatch, so a damaged line is named where it is. Where another file
disagrees with ``stimulus.hex`` (other formats, expected words, line counts)
and ``stimulus.hex`` fails its hash while the other file passes, the stimulus
is named as the damaged file.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from itertools import islice
from pathlib import Path

import numpy as np

from refmodel.block_spec import BlockSpec, spec_from_dict
from refmodel.errors import SpecError, require
from refmodel.fixedpoint.map_fast import MapPipeline
from refmodel.input_files import open_regular
from refmodel.fixedpoint.pipeline_fast import FastPipeline
from refmodel.fixedpoint.word_format import FIELDS, PipelineOutput, pack_output, unpack_input, unpack_output

from .manifest import (DIGEST_KEY, NAME, SET_FORMAT, SET_FORMAT_VERSION, digest, form_difference, parse_manifest,
                       word_layout)
from .vector_set import EXPECTED_COLUMNS, STIMULUS_COLUMNS, FramePosition
from .writers import FORMATS, HEX_VALUE, ParseError, line_bytes, parse_csv, parse_fixed

CHUNK = 1 << 20


@dataclass(frozen=True)
class Finding:
    """One disagreement.

    Attributes
    ----------
    file : str
        The file at fault (``manifest.json`` for manifest problems).
    message : str
        What disagrees.
    line : int or None
        1-based line in ``file``.
    frame, index : int or None
        Frame number and index within the frame of that line's word.
    field : str or None
        Word field (``sample``, ``last``, ``cut``, ``threshold``, ``det``,
        ``valid``, or a CSV column) or manifest key.
    """

    file: str
    message: str
    line: int | None = None
    frame: int | None = None
    index: int | None = None
    field: str | None = None

    def __str__(self) -> str:
        where = self.file
        if self.line is not None:
            where += f" line {self.line}"
        if self.frame is not None:
            where += f" (frame {self.frame}, index {self.index})"
        if self.field is not None:
            where += f" field {self.field}"
        return f"{where}: {self.message}"


@dataclass(frozen=True)
class CheckReport:
    """Outcome of :func:`check_vector_set`.

    Attributes
    ----------
    folder : str
    findings : tuple of Finding
        Empty when the set is intact and agrees with the model.
    frames, samples : int
        Counted in the stimulus (as far as it was read).
    files : int
        Data files whose hash was verified.
    """

    folder: str
    findings: tuple[Finding, ...] = field(default=())
    frames: int = 0
    samples: int = 0
    files: int = 0

    @property
    def ok(self) -> bool:
        return not self.findings

    def summary(self) -> str:
        """One line: ``OK ...`` or the first finding and how many more there are."""
        if self.ok:
            return (f"OK {self.folder}: {self.files} data files match their SHA-256; {self.frames} frames, "
                    f"{self.samples} samples; every expected word agrees with the model")
        more = f" (and {len(self.findings) - 1} more)" if len(self.findings) > 1 else ""
        return f"MISMATCH {self.folder}: {self.findings[0]}{more}"


class _Mismatch(Exception):
    def __init__(self, finding: Finding):
        self.finding = finding


# --------------------------------------------------------------------------
# Manifest
# --------------------------------------------------------------------------


def _spec_of(m: dict) -> BlockSpec:
    spec_dict = m.get("spec")
    if not isinstance(spec_dict, dict):
        raise _Mismatch(Finding(NAME, "no spec table", field="spec"))
    data = {k: dict(v) if isinstance(v, dict) else v for k, v in spec_dict.items()}
    try:
        return spec_from_dict(data)
    except SpecError as exc:
        raise _Mismatch(Finding(NAME, f"the recorded spec is not valid ({exc})", field=f"spec.{exc.field}")) from None


def _manifest_findings(m: dict, spec: BlockSpec) -> list[Finding]:
    out = []
    expect = {"format": SET_FORMAT, "format_version": SET_FORMAT_VERSION, "derived": spec.derived(),
              "latency_cycles": spec.latency_cycles, "words": word_layout(spec)}
    for key, want in expect.items():
        got = m.get(key)
        if isinstance(want, dict) and isinstance(got, dict):
            for k in sorted(set(want) | set(got)):
                if got.get(k) != want.get(k):
                    out.append(Finding(NAME, f"is {got.get(k)!r}, the recorded spec gives {want.get(k)!r}",
                                       field=f"{key}.{k}"))
                    break
        elif got != want:
            out.append(Finding(NAME, f"is {got!r}, expected {want!r}", field=key))
    try:
        sealed = m.get(DIGEST_KEY) == digest(m)
    except (TypeError, ValueError):
        sealed = False
    if not sealed:
        out.append(Finding(NAME, "the manifest does not match its own SHA-256 (edited or damaged)",
                           field=DIGEST_KEY))
    return out


def _file_records(m: dict, spec: BlockSpec) -> dict[tuple[str, str], dict]:
    files = m.get("files")
    if not isinstance(files, list) or not files:
        raise _Mismatch(Finding(NAME, "no file list", field="files"))
    layout = word_layout(spec)
    recs = {}
    for i, r in enumerate(files):
        ok = (isinstance(r, dict) and isinstance(r.get("name"), str) and r.get("role") in layout
              and r.get("format") in FORMATS and isinstance(r.get("lines"), int)
              and isinstance(r.get("sha256"), str) and isinstance(r.get("word_bits"), int))
        if not ok:
            raise _Mismatch(Finding(NAME, f"malformed file entry {r!r}", field=f"files[{i}]"))
        name = r["name"]
        if Path(name).name != name or name.startswith(".") or name == NAME:
            raise _Mismatch(Finding(NAME, f"file name {name!r} is not a plain data file name", field=f"files[{i}]"))
        if r["word_bits"] != layout[r["role"]]["bits"]:
            raise _Mismatch(Finding(NAME, f"word_bits is {r['word_bits']}, the spec gives "
                                          f"{layout[r['role']]['bits']}", field=f"files[{i}].word_bits"))
        if (r["role"], r["format"]) in recs:
            raise _Mismatch(Finding(NAME, f"two {r['role']} {r['format']} files", field=f"files[{i}]"))
        recs[(r["role"], r["format"])] = r
    for role in layout:
        if (role, "hex") not in recs:
            raise _Mismatch(Finding(NAME, f"no {role} hex file listed", field="files"))
    return recs


def _hash_findings(folder: Path, recs: dict) -> tuple[list[Finding], set[str]]:
    out, bad = [], set()
    for r in recs.values():
        path = folder / r["name"]
        h, lines = hashlib.sha256(), 0
        try:
            with open_regular(path, r["name"]) as f:  # a FIFO or device in place of a file must not hang
                while block := f.read(1 << 22):
                    h.update(block)
                    lines += block.count(b"\n")
        except (OSError, SpecError) as exc:
            out.append(Finding(r["name"], f"cannot be read ({getattr(exc, 'problem', None) or exc.strerror})"))
            bad.add(r["name"])
            continue
        if h.hexdigest() != r["sha256"]:
            out.append(Finding(r["name"], f"SHA-256 is {h.hexdigest()}, the manifest says {r['sha256']}"))
            bad.add(r["name"])
        if lines != r["lines"]:
            out.append(Finding(r["name"], f"has {lines} lines, the manifest says {r['lines']}"))
            bad.add(r["name"])
    return out, bad


def _stray_findings(folder: Path, recs: dict) -> list[Finding]:
    """Every entry of the set folder (hidden ones and folders included) that the manifest does not list."""
    listed = {r["name"] for r in recs.values()} | {NAME}
    return [Finding(p.name, "is not listed in the manifest (an unexpected file in the set folder)")
            for p in sorted(folder.iterdir(), key=lambda p: p.name) if p.name not in listed]


# --------------------------------------------------------------------------
# Readers
# --------------------------------------------------------------------------


class _Reader:
    """Reads words (``hex``/``bin``) or rows (``csv``) of one file, chunk by chunk."""

    def __init__(self, path: Path, fmt: str, bits: int, header: tuple[str, ...]):
        self.name, self.fmt, self.bits, self.columns = path.name, fmt, bits, len(header)
        self.file = open(path, "rb")
        self.line = 1  # number of the next line
        if fmt == "csv":
            first = self.file.readline()
            if first != (",".join(header) + "\n").encode():
                self.close()
                raise _Mismatch(Finding(self.name, f"header is {first!r}, expected {','.join(header)!r}", line=1))
            self.line = 2

    def read(self, n: int) -> np.ndarray:
        try:
            if self.fmt == "csv":
                rows = b"".join(islice(self.file, n))
                got = parse_csv(rows, self.columns, self.line)
            else:
                got = parse_fixed(self.file.read(n * line_bytes(self.fmt, self.bits)), self.fmt, self.bits,
                                  self.line)
        except ParseError as exc:
            raise _Mismatch(Finding(self.name, exc.problem, line=exc.line)) from None
        self.line += got.shape[0]
        return got

    def at_end(self) -> bool:
        return self.file.read(1) == b""

    def close(self) -> None:
        self.file.close()


# --------------------------------------------------------------------------
# Content
# --------------------------------------------------------------------------


class _Content:
    """The streamed content comparison; raises :class:`_Mismatch` at the first difference."""

    def __init__(self, folder: Path, spec: BlockSpec, recs: dict, bad: set[str], chunk: int):
        self.spec, self.bad, self.chunk = spec, bad, chunk
        self.readers: list[_Reader] = []
        bits = {"stimulus": spec.input_word_bits, "expected": spec.output_bits}
        header = {"stimulus": STIMULUS_COLUMNS, "expected": EXPECTED_COLUMNS}

        def reader(role, fmt):
            r = _Reader(folder / recs[(role, fmt)]["name"], fmt, bits[role], header[role])
            self.readers.append(r)
            return r

        try:
            self.stim = reader("stimulus", "hex")
            self.stim_alt = [reader("stimulus", f) for f in FORMATS[1:] if ("stimulus", f) in recs]
            self.mirror = reader("expected", "hex")  # read in step with the stimulus
            self.expected = [reader("expected", f) for f in FORMATS if ("expected", f) in recs]
        except BaseException:
            self.close()
            raise
        self.stim_pos, self.out_pos = FramePosition(), FramePosition()
        self.frames = self.samples = 0
        self.frame_len = 0  # samples of the current, unfinished frame
        self.stim_bad = recs[("stimulus", "hex")]["name"] in bad

    def close(self) -> None:
        for r in self.readers:
            r.close()

    # -- helpers --------------------------------------------------------
    def _at(self, file: str, first_line: int, i: int, frame: np.ndarray, index: np.ndarray, fld: str,
            msg: str) -> Finding:
        return Finding(file, msg, line=first_line + i, frame=int(frame[i]), index=int(index[i]), field=fld)

    def _blame(self, name: str) -> str:
        """The file to name for a disagreement between ``name`` and what the stimulus implies.

        ``name`` itself, unless it passes its hash check and ``stimulus.hex`` does not.
        """
        return self.stim.name if self.stim_bad and name not in self.bad else name

    def _against_stimulus(self, name: str, msg: str, **where) -> Finding:
        """A finding about ``name`` disagreeing with the stimulus, naming the damaged file (:meth:`_blame`)."""
        blamed = self._blame(name)
        if blamed != name:
            msg = (msg if name in msg else f"{name} {msg}") + f" ({blamed} fails its SHA-256, {name} passes)"
        return Finding(blamed, msg, **where)

    def _compare_columns(self, reader: _Reader, first_line: int, got: np.ndarray, want: list[np.ndarray],
                         names: tuple[str, ...], frame, index, ref: str) -> None:
        n = min(got.shape[0], want[0].shape[0])
        diff = np.zeros(n, dtype=bool)
        for c in range(len(names)):
            diff |= got[:n, c].astype(np.uint64) != np.asarray(want[c][:n], dtype=np.uint64)
        if diff.any():
            i = int(np.argmax(diff))
            c = next(c for c in range(len(names)) if int(got[i, c]) != int(want[c][i]))
            raise _Mismatch(self._against_stimulus(
                reader.name, f"is {int(got[i, c])} in {reader.name}, {ref} gives {int(want[c][i])}",
                line=first_line + i, frame=int(frame[i]), index=int(index[i]), field=names[c]))
        if got.shape[0] < want[0].shape[0]:
            raise _Mismatch(self._against_stimulus(reader.name, f"ends at line {first_line + n - 1}; {ref} gives more",
                                                   line=first_line + n))

    # -- stimulus side --------------------------------------------------
    def stimulus_chunk(self) -> tuple[np.ndarray, np.ndarray] | None:
        first = self.stim.line
        words = self.stim.read(self.chunk)
        if not words.shape[0]:
            return None
        samples, last = unpack_input(self.spec, words)
        frame, index = self.stim_pos.advance(last)
        for r in self.stim_alt:
            got = r.read(words.shape[0])
            if r.fmt == "csv":
                self._compare_columns(r, r.line - got.shape[0], got, [frame, index, samples, last],
                                      STIMULUS_COLUMNS, frame, index, ref=self.stim.name)
            else:
                self._compare_columns(r, first, got[:, None], [words], ("word",), frame, index, ref=self.stim.name)
        # The expected words' CUT and last fields mirror the stimulus line for line.
        mirror = self.mirror.read(words.shape[0])
        if mirror.shape[0] < words.shape[0]:
            raise _Mismatch(self._against_stimulus(self.mirror.name,
                                                   f"ends at line {self.mirror.line - 1}, before the stimulus",
                                                   line=self.mirror.line))
        echo = unpack_output(self.spec, mirror)
        d_last, d_cut = echo.last != last, echo.cut != samples
        if (d_last | d_cut).any():
            i = int(np.argmax(d_last | d_cut))
            name, have, want, what = (("last", echo.last, last, "last") if d_last[i]
                                      else ("cut", echo.cut, samples, "sample"))
            raise _Mismatch(self._against_stimulus(
                self.mirror.name, f"is {int(have[i])} in {self.mirror.name}, {what} is {int(want[i])} in "
                                  f"{self.stim.name}",
                line=first + i, frame=int(frame[i]), index=int(index[i]), field=name))
        # Frame structure.
        ends = np.flatnonzero(last)
        if ends.size:
            lengths = np.diff(np.concatenate(([-1 - self.frame_len], ends)))
            short = lengths < self.spec.window_length
            if short.any():
                i = int(ends[np.argmax(short)])
                raise _Mismatch(self._at(self.stim.name, first, i, frame, index, "last",
                                         f"frame is {int(lengths[np.argmax(short)])} samples long, shorter than "
                                         f"the window ({self.spec.window_length})"))
            self.frame_len = int(words.shape[0] - 1 - ends[-1])
        else:
            self.frame_len += int(words.shape[0])
        self.samples += int(words.shape[0])
        self.frames += int(ends.size)
        return samples, last

    # -- expected side --------------------------------------------------
    def expected_words(self, out: PipelineOutput) -> None:
        if not len(out):
            return
        model = pack_output(self.spec, out)
        frame, index = self.out_pos.advance(out.last)
        for r in self.expected:
            first = r.line
            got = r.read(len(out))
            if r.fmt == "csv":
                want = [frame, index] + [getattr(out, f) for f in FIELDS]
                self._compare_columns(r, first, got, want, EXPECTED_COLUMNS, frame, index, "the model")
                continue
            n = min(got.shape[0], model.shape[0])
            diff = got[:n] != model[:n]
            if diff.any():
                i = int(np.argmax(diff))
                have = unpack_output(self.spec, got[i : i + 1])
                fld = next(f for f in FIELDS if int(getattr(have, f)[0]) != int(getattr(out, f)[i]))
                raise _Mismatch(self._against_stimulus(
                    r.name, f"is {int(getattr(have, fld)[0])} in {r.name}, the model gives {int(getattr(out, fld)[i])}",
                    line=first + i, frame=int(frame[i]), index=int(index[i]), field=fld))
            if got.shape[0] < model.shape[0]:
                raise _Mismatch(self._against_stimulus(r.name, f"ends at line {first + n - 1}; the model gives more "
                                                               f"words", line=first + n))

    def run(self) -> None:
        pipe = MapPipeline(self.spec) if getattr(self.spec, "is_map", False) else FastPipeline(self.spec)
        while (chunk := self.stimulus_chunk()) is not None:
            try:
                out = pipe.push(*chunk)
            except SpecError as exc:
                raise _Mismatch(Finding(self.stim.name, f"the model refuses the stimulus ({exc})")) from None
            self.expected_words(out)
        if self.frame_len:
            raise _Mismatch(Finding(self.stim.name, "the stream ends without a last marker",
                                    line=self.stim.line - 1, field="last"))
        try:
            out = pipe.finish()
        except SpecError as exc:
            raise _Mismatch(Finding(self.stim.name, f"the model refuses the stimulus ({exc})")) from None
        self.expected_words(out)
        for r in self.readers:
            if r is not self.mirror and r is not self.stim and not r.at_end():
                raise _Mismatch(self._against_stimulus(r.name, "has more lines than the stimulus has words",
                                                       line=r.line))


def _locate(folder: Path, spec: BlockSpec, rec: dict, word: int) -> tuple[int, int]:
    """Frame and index of stimulus word ``word`` (0-based), from the last-marker bits of ``stimulus.hex``.

    Lenient on purpose (it serves findings about damaged files): a line that
    is not a hex word counts as a word without the marker.
    """
    width = line_bytes("hex", spec.input_word_bits)
    col = width - 2 - spec.input_bits // 4  # the digit holding bit W_in
    bit = spec.input_bits % 4
    frame, since = 0, 0
    with open(folder / rec["name"], "rb") as f:
        left = word
        while left > 0:
            n = min(left, CHUNK)
            data = f.read(n * width)
            m = np.frombuffer(data[: len(data) - len(data) % width], dtype=np.uint8).reshape(-1, width)
            if not m.shape[0]:
                break
            v = HEX_VALUE[m[:, col]]
            last = (v != 255) & ((v >> bit) & 1 == 1)
            ends = np.flatnonzero(last)
            frame += int(ends.size)
            since = int(m.shape[0] - 1 - ends[-1]) if ends.size else since + int(m.shape[0])
            left -= m.shape[0]
    return frame, since


def _count_findings(m: dict, frames: int, samples: int) -> list[Finding]:
    out = []
    totals, sources = m.get("totals"), m.get("sources")
    if not isinstance(totals, dict) or totals.get("frames") != frames or totals.get("samples") != samples:
        out.append(Finding(NAME, f"says {totals!r}, the stimulus holds {frames} frames, {samples} samples",
                           field="totals"))
    if not isinstance(sources, list) or not all(isinstance(s, dict) for s in sources):
        out.append(Finding(NAME, "no source list", field="sources"))
    else:
        line, frame = 1, 0
        for i, s in enumerate(sources):
            if s.get("first_line") != line or s.get("first_frame") != frame:
                out.append(Finding(NAME, f"source {s.get('name')!r} does not follow the one before",
                                   field=f"sources[{i}]"))
                break
            line += s.get("samples", 0) if isinstance(s.get("samples"), int) else 0
            frame += s.get("frames", 0) if isinstance(s.get("frames"), int) else 0
        if (line - 1, frame) != (samples, frames):
            out.append(Finding(NAME, "the sources' counts do not add up to the stimulus", field="sources"))
    return out


def check_vector_set(folder: str | Path, *, chunk_samples: int = CHUNK) -> CheckReport:
    """Check a vector set folder.

    Parameters
    ----------
    folder : str or pathlib.Path
        A folder written by ``cfarvec vectors``.
    chunk_samples : int
        Stimulus words read per step (bounds memory).

    Returns
    -------
    CheckReport
        ``report.ok`` is true when nothing disagrees.

    Raises
    ------
    SpecError
        When ``folder`` is not a folder holding ``manifest.json`` (bad input,
        as opposed to a damaged set, which is reported as findings).
    """
    path = Path(folder)
    allowed = "a vector set folder written by cfarvec vectors"
    require(path.is_dir(), "DIR", f"{str(path)!r} is not a folder", allowed)
    require((path / NAME).is_file(), "DIR", f"no {NAME} in {str(path)!r}", allowed)
    try:
        raw = (path / NAME).read_bytes()
        m = parse_manifest(raw)
    except (OSError, ValueError, RecursionError) as exc:  # RecursionError: nested too deeply for json
        return CheckReport(str(path), (Finding(NAME, f"cannot be parsed ({exc})"),))
    form = []
    line = form_difference(raw, m)
    if line is not None:
        form.append(Finding(NAME, "is not byte for byte the form cfarvec writes (indent 2, keys sorted, ASCII, LF "
                                  "line ends, final newline): edited, even if the meaning is the same", line=line))
    head: list[Finding] = []
    hashes: list[Finding] = []
    found: list[Finding] = []
    frames = samples = files = 0
    try:
        spec = _spec_of(m)
        head = _manifest_findings(m, spec)
        recs = _file_records(m, spec)
        hashes, bad = _hash_findings(path, recs)
        hashes += _stray_findings(path, recs)
        files = len(recs)
        if not any(f.message.startswith("cannot be read") for f in hashes):
            content = _Content(path, spec, recs, bad, chunk_samples)
            try:
                content.run()
                found = _count_findings(m, content.frames, content.samples)
            finally:
                content.close()
                frames, samples = content.frames, content.samples
    except _Mismatch as mm:
        found = [mm.finding]
    if found and found[0].line is not None and found[0].frame is None and found[0].file != NAME:
        f = found[0]
        rec = next((r for r in recs.values() if r["name"] == f.file), None)
        word = f.line - (2 if rec and rec["format"] == "csv" else 1)
        if word >= 0:
            frame, index = _locate(path, spec, recs[("stimulus", "hex")], word)
            found[0] = Finding(f.file, f.message, f.line, frame, index, f.field or "word")
    # The manifest's seal and form first (an edited manifest explains what follows), then content, then hashes
    # and unexpected files.
    seal = [f for f in head if f.field == DIGEST_KEY]
    rest = [f for f in head if f.field != DIGEST_KEY]
    return CheckReport(str(path), tuple(seal + form + rest + found + hashes), frames, samples, files)
