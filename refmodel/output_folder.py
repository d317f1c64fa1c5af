"""Output folders that appear whole or not at all.

Every command that writes a folder (vector sets, testbench folders, study
reports) writes into a temporary folder beside the target and renames it into
place only when complete; any failure, including Ctrl-C, removes the
temporary folder. An existing non-empty target is refused unless ``force``,
and is then replaced only once the new folder is complete.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from .errors import SpecError, require


def check_target(out: Path, force: bool, field: str = "--output") -> None:
    """Refuse a target that is a file, or a non-empty folder without ``force``."""
    if out.exists() or out.is_symlink():
        require(out.is_dir() and not out.is_symlink(), field, f"{str(out)!r} exists and is not a folder",
                "a new or empty folder, or an existing folder with --force")
        if any(out.iterdir()):
            require(force, field, f"{str(out)!r} exists and is not empty",
                    "a new or empty folder, or --force to replace it")


def check_not_precious(output: str | Path, field: str = "--output", holds: tuple = ()) -> None:
    """Refuse an empty path, the current folder or any of its ancestors, and a folder holding ``holds``.

    A forced replacement of such a folder would delete the user's own files
    (the current work, the spec, the RTL).
    """
    require(str(output) != "", field, "an empty path", "a folder path")
    out = Path(output).absolute().resolve()
    here = Path.cwd().resolve()
    require(out != here and out not in here.parents, field, f"{str(out)!r} is the current folder or holds it",
            "a new folder, or one that holds neither the current folder nor your files")
    for f in holds:
        p = Path(f).absolute().resolve()
        require(out != p and out not in p.parents, field, f"{str(out)!r} holds {str(p)!r}",
                "a folder that does not hold the spec or the RTL")


def _move_into_place(tmp: Path, out: Path) -> None:
    if out.exists() and any(out.iterdir()):
        old = Path(tempfile.mkdtemp(prefix=f".{out.name}.old-", dir=out.parent))
        os.replace(out, old / "previous")
        try:
            os.replace(tmp, out)
        except BaseException:
            os.replace(old / "previous", out)
            shutil.rmtree(old, ignore_errors=True)
            raise
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(tmp, out)  # an empty existing folder is replaced by the rename itself


@contextmanager
def staged_folder(output: str | Path, force: bool = False, field: str = "--output") -> Iterator[Path]:
    """Yield a temporary folder beside ``output``; rename it to ``output`` when the block ends cleanly.

    Parameters
    ----------
    output : str or pathlib.Path
        Target folder. Missing parent folders are created.
    force : bool
        Replace an existing non-empty target (only once the new folder is complete).
    field : str
        Option name used in errors (e.g. ``"--output"`` or ``"-o"``).

    Raises
    ------
    SpecError
        For a target that is a file, a non-empty target without ``force``, or
        a parent folder that cannot be made; nothing is written then.
    """
    check_not_precious(output, field)
    out = Path(output).absolute()
    check_target(out, force, field)
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.partial-", dir=out.parent))
    except OSError as exc:
        raise SpecError(field, f"cannot create a folder in {str(out.parent)!r} ({exc.strerror})",
                        "a path whose parent is, or can be made, a writable folder") from None
    try:
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o777 & ~umask)  # mkdtemp makes it private; the result is an ordinary folder
        yield tmp
        check_target(out, force, field)  # it may have appeared meanwhile
        _move_into_place(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
