"""Output folders that appear whole or not at all, and never in a place that would destroy the user's files.

Every command that writes a folder (vector sets, testbench folders, study
reports) writes into a temporary folder ``.NAME.partial-*`` beside the target
``NAME`` and renames it into place only when complete; any failure, including
Ctrl-C, SIGTERM and SIGHUP (which the command line turns into the same
interrupt), removes the temporary folder. An existing non-empty target is
refused unless ``force``, and is then replaced only once the new folder is
complete: the old folder is first moved into ``.NAME.old-*/previous``, the new
one renamed into place, and the old one removed.

A run killed outright (SIGKILL, power loss) can leave those hidden folders
behind, or, killed between the two renames, the previous output only inside
``.NAME.old-*/previous``. Each folder in use is locked (``flock``; the lock
goes with its process), so the next run for the same target recognises
what a dead run left: it moves a stranded previous output back to ``NAME``
and removes the rest (:func:`recover_leftovers`).

Some targets are refused whatever ``force`` says (:func:`check_safe_target`):
an empty path, the current folder or any folder that holds it, the home
folder or any folder that holds it, and any folder that holds one of the
caller's input files (the spec, the RTL).
"""

from __future__ import annotations

import fcntl
import os
import re
import shutil
import signal
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterable, Iterator

from .errors import SpecError, require

#: Signals held back while the previous output and the new one change places (the command line
#: turns each of them into an interrupt; see :mod:`cfarvec.cli`).
HELD_SIGNALS = (signal.SIGINT, signal.SIGTERM, signal.SIGHUP)

_ALLOWED = "a new or empty folder, or an existing folder with --force"


def _holds(folder: Path, path: Path) -> bool:
    """True when ``folder`` is ``path`` or one of its parents (both already resolved)."""
    return folder == path or folder in path.parents


def check_safe_target(output: str | Path, field: str = "--output", protect: Iterable[str | Path] = ()) -> Path:
    """Refuse a target whose replacement would destroy the user's own files; return its absolute path.

    Parameters
    ----------
    output : str or pathlib.Path
        The target folder as the user gave it.
    field : str
        Option name used in errors (``"--output"``, ``"--keep"``, ...).
    protect : iterable of path
        The caller's input files (the spec, RTL files): no folder holding any
        of them may be the target.

    Returns
    -------
    pathlib.Path
        The target as an absolute path (symbolic links not resolved).

    Raises
    ------
    SpecError
        For an empty path, the current folder or a folder holding it, the
        home folder or a folder holding it, or a folder holding a protected file.
    """
    text = os.fspath(output)
    require(text.strip() != "", field, "got an empty path", "a folder path")
    out = Path(text).absolute()
    real = Path(os.path.realpath(out))
    allowed = "a folder that holds neither the current folder, the home folder nor the input files"
    cwd = Path(os.path.realpath(Path.cwd()))
    require(not _holds(real, cwd), field,
            f"{text!r} is the current folder" if real == cwd else f"{text!r} holds the current folder", allowed)
    try:
        home = Path(os.path.realpath(Path.home()))
    except (KeyError, RuntimeError):  # no home folder known for this user
        home = None
    require(home is None or not _holds(real, home), field,
            f"{text!r} is the home folder" if real == home else f"{text!r} holds the home folder", allowed)
    for p in protect:
        if p is None:
            continue
        target = Path(os.path.realpath(os.fspath(p)))
        require(real == target or not _holds(real, target), field,
                f"{text!r} holds the input file {os.fspath(p)!r}", allowed)
    return out


def _size(n: int) -> str:
    for unit in ("bytes", "kB", "MB", "GB", "TB", "PB"):
        if n < 1000 or unit == "PB":
            return f"{n:.0f} {unit}" if unit == "bytes" else f"{n:.3g} {unit}"
        n /= 1000
    return ""


def check_target(out: Path, force: bool, field: str = "--output") -> None:
    """Refuse a target that is a file, or a non-empty folder without ``force``."""
    if out.exists() or out.is_symlink():
        require(out.is_dir() and not out.is_symlink(), field, f"{str(out)!r} exists and is not a folder", _ALLOWED)
        if any(out.iterdir()):
            require(force, field, f"{str(out)!r} exists and is not empty",
                    "a new or empty folder, or --force to replace it")


def _leftover_pattern(name: str) -> re.Pattern:
    # tempfile.mkdtemp's random part is 8 characters of [a-z0-9_], never a dot, so the name cannot be mistaken.
    return re.compile(rf"\.{re.escape(name)}\.(partial|old)-[a-z0-9_]{{8}}")


def _lock(folder: Path, wait: bool = True) -> int | None:
    """Lock ``folder`` for this process; the file descriptor to close, or None when another process holds it."""
    fd = os.open(folder, os.O_RDONLY | os.O_DIRECTORY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | (0 if wait else fcntl.LOCK_NB))
    except BlockingIOError:
        os.close(fd)
        return None
    return fd


def _is_empty_folder(p: Path) -> bool:
    return p.is_dir() and not p.is_symlink() and not any(p.iterdir())


def recover_leftovers(output: str | Path) -> list[str]:
    """Tidy what earlier runs killed outright left beside ``output``.

    A ``.NAME.old-*`` folder whose ``previous`` folder is the only copy of
    the previous output (the run died between its two renames) gives it back
    as ``NAME``; every other ``.NAME.partial-*`` and ``.NAME.old-*`` folder
    not locked by a live process is removed.

    Parameters
    ----------
    output : str or pathlib.Path
        The target folder.

    Returns
    -------
    list of str
        What was done, one short sentence each (empty when nothing was left).
    """
    out = Path(output).absolute()
    if not out.parent.is_dir():
        return []
    pattern = _leftover_pattern(out.name)
    found = sorted((e for e in out.parent.iterdir() if pattern.fullmatch(e.name) and e.is_dir()
                    and not e.is_symlink()), key=lambda e: (".partial-" in e.name, e.name))  # old-* first
    done = []
    for entry in found:
        try:
            fd = _lock(entry, wait=False)
        except OSError:
            continue
        if fd is None:  # a live run is using it
            continue
        try:
            previous = entry / "previous"
            if ".old-" in entry.name and previous.is_dir() and (not (out.exists() or out.is_symlink())
                                                                 or _is_empty_folder(out)):
                os.replace(previous, out)
                done.append(f"restored the previous {out.name} from {entry.name}")
            shutil.rmtree(entry, ignore_errors=True)
            done.append(f"removed {entry.name}")
        finally:
            os.close(fd)
    return done


@contextmanager
def _signals_held() -> Iterator[None]:
    """Hold back Ctrl-C, SIGTERM and SIGHUP for the duration (they are delivered afterwards)."""
    old = signal.pthread_sigmask(signal.SIG_BLOCK, HELD_SIGNALS)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _move_into_place(tmp: Path, out: Path) -> None:
    if out.exists() and any(out.iterdir()):
        old = Path(tempfile.mkdtemp(prefix=f".{out.name}.old-", dir=out.parent))
        fd = _lock(old)
        try:
            with _signals_held():
                os.replace(out, old / "previous")
                try:
                    os.replace(tmp, out)
                except BaseException:
                    os.replace(old / "previous", out)
                    raise
            shutil.rmtree(old, ignore_errors=True)
        finally:
            os.close(fd)
            shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(tmp, out)  # an empty existing folder is replaced by the rename itself


@contextmanager
def staged_folder(output: str | Path, force: bool = False, field: str = "--output",
                  protect: Iterable[str | Path] = (), need_bytes: int = 0) -> Iterator[Path]:
    """Yield a temporary folder beside ``output``; rename it to ``output`` when the block ends cleanly.

    Parameters
    ----------
    output : str or pathlib.Path
        Target folder. Missing parent folders are created.
    force : bool
        Replace an existing non-empty target (only once the new folder is complete).
    field : str
        Option name used in errors (e.g. ``"--output"`` or ``"-o"``).
    protect : iterable of path
        Input files (the spec, RTL files) that no target may hold
        (see :func:`check_safe_target`).
    need_bytes : int
        About how much the folder will hold: refused at once when the target's
        file system has less free space.

    Raises
    ------
    SpecError
        For an unsafe target (:func:`check_safe_target`), a target that is a
        file, a non-empty target without ``force``, a parent folder that
        cannot be made, or too little free space; nothing is written then.

    Notes
    -----
    What an earlier run killed outright left beside the target is tidied
    first (:func:`recover_leftovers`).
    """
    out = check_safe_target(output, field, protect)
    recover_leftovers(out)
    check_target(out, force, field)
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.partial-", dir=out.parent))
    except OSError as exc:
        raise SpecError(field, f"cannot create a folder in {str(out.parent)!r} ({exc.strerror})",
                        "a path whose parent is, or can be made, a writable folder") from None
    fd = _lock(tmp)
    try:
        free = shutil.disk_usage(tmp).free
        require(need_bytes <= free, field, f"the output needs about {_size(need_bytes)}, but only {_size(free)} "
                f"are free in {str(out.parent)!r}", "a smaller output, or a file system with more free space")
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o777 & ~umask)  # mkdtemp makes it private; the result is an ordinary folder
        yield tmp
        check_target(out, force, field)  # it may have appeared meanwhile
        _move_into_place(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    finally:
        os.close(fd)
