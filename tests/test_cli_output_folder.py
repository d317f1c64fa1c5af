"""Output folders: targets that would destroy the user's files are refused; signals leave nothing behind.

Repros of issue 15, item 2: ``-o ''`` or ``-o .`` with ``--force`` replaced
the current folder and deleted the user's files; SIGKILL, SIGTERM and SIGHUP
left hidden ``.NAME.partial-*`` / ``.NAME.old-*`` folders that later runs never
removed, and a kill between the two renames left the previous output only
inside the hidden folder.

The signal tests run real processes and send them real signals. The child
writes a marker file once it is inside the staged folder (or waits there on
its standard input), and the test waits for that marker rather than for a
time. The conventions checked are POSIX ones: a process that handles a
terminating signal N exits with 128 + N (common practice, no source;
``bash(1)`` reports signal deaths that way), and ``flock`` locks are released
when their process dies (Linux ``flock(2)``).
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from cfarvec import cli
from refmodel.errors import SpecError
from refmodel.output_folder import check_safe_target, recover_leftovers, staged_folder

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "tests" / "data" / "vectors_small.toml"


def _hidden(parent: Path) -> list[str]:
    return sorted(p.name for p in parent.iterdir() if ".partial-" in p.name or ".old-" in p.name)


@pytest.fixture()
def workdir(tmp_path, monkeypatch):
    """A current folder holding a spec and a file of the user's own."""
    d = tmp_path / "work"
    d.mkdir()
    shutil.copy(SMALL, d / "spec.toml")
    (d / "notes.txt").write_text("the user's own file\n")
    monkeypatch.chdir(d)
    return d


# ---------------------------------------------------------------- targets refused whatever --force says

@pytest.mark.parametrize("target", ["", ".", "./", "..", "/", " "])
def test_current_folder_and_its_ancestors_are_refused(workdir, capsys, target):
    code = cli.main(["vectors", "spec.toml", "-o", target, "--force"])
    err = capsys.readouterr().err
    assert code == 2 and len(err.splitlines()) == 1 and "--output" in err, err
    assert (workdir / "notes.txt").read_text() == "the user's own file\n"
    assert sorted(p.name for p in workdir.iterdir()) == ["notes.txt", "spec.toml"]


def test_the_folder_holding_the_spec_is_refused(tmp_path, workdir, capsys):
    specs = workdir / "specs" / "radar"
    specs.mkdir(parents=True)
    shutil.copy(SMALL, specs / "spec.toml")
    other = tmp_path / "elsewhere"
    other.mkdir()
    os.chdir(other)
    for target in (specs, specs.parent):
        code = cli.main(["vectors", str(specs / "spec.toml"), "-o", str(target), "--force"])
        err = capsys.readouterr().err
        assert code == 2 and "holds the input file" in err and len(err.splitlines()) == 1, err
    assert (specs / "spec.toml").is_file() and sorted(p.name for p in specs.iterdir()) == ["spec.toml"]


def test_a_symlink_to_the_current_folder_is_refused(workdir, tmp_path, capsys):
    link = tmp_path / "link"
    link.symlink_to(workdir)
    assert cli.main(["vectors", "spec.toml", "-o", str(link), "--force"]) == 2
    assert (workdir / "notes.txt").is_file()


def test_the_home_folder_is_refused(tmp_path, monkeypatch):
    home = tmp_path / "home"
    (home / "work").mkdir(parents=True)
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.chdir(tmp_path)
    with pytest.raises(SpecError, match="home folder"):
        check_safe_target(home, "--output")


def test_a_new_folder_beside_the_spec_is_still_fine(workdir, capsys):
    assert cli.main(["vectors", "spec.toml", "-o", "out"]) == 0
    assert (workdir / "out" / "manifest.json").is_file()
    assert cli.main(["vectors", "spec.toml", "-o", "out", "--force"]) == 0
    assert _hidden(workdir) == [] and (workdir / "notes.txt").is_file()


# ---------------------------------------------------------------- leftovers of a run killed outright

def test_leftovers_of_dead_runs_are_removed(tmp_path):
    out = tmp_path / "set"
    (tmp_path / ".set.partial-abc12345").mkdir()
    (tmp_path / ".set.partial-abc12345" / "stimulus.hex").write_text("0\n")
    (tmp_path / ".set.old-x_9x_9x_").mkdir()
    (tmp_path / ".other.partial-abcdefgh").mkdir()  # another target's: not touched
    (tmp_path / ".set.partial-x.partial-abcdefgh").mkdir()  # target "set.partial-x"'s: not touched
    with staged_folder(out) as tmp:
        (tmp / "a").write_text("new\n")
    assert (out / "a").read_text() == "new\n"
    assert _hidden(tmp_path) == [".other.partial-abcdefgh", ".set.partial-x.partial-abcdefgh"]


def test_previous_output_stranded_between_the_renames_comes_back(tmp_path):
    out = tmp_path / "set"
    (tmp_path / ".set.old-k1k1k1k1" / "previous").mkdir(parents=True)
    (tmp_path / ".set.old-k1k1k1k1" / "previous" / "manifest.json").write_text("previous\n")
    (tmp_path / ".set.partial-k2k2k2k2").mkdir()
    (tmp_path / ".set.partial-k2k2k2k2" / "manifest.json").write_text("unfinished\n")
    # Without --force the restored previous output is kept and the new run refused.
    with pytest.raises(SpecError, match="not empty"):
        with staged_folder(out):
            pass
    assert (out / "manifest.json").read_text() == "previous\n" and _hidden(tmp_path) == []


def test_a_folder_locked_by_a_live_process_is_left_alone(tmp_path):
    busy = tmp_path / ".set.partial-live0000"
    busy.mkdir()
    holder = subprocess.Popen(
        [sys.executable, "-c", textwrap.dedent("""
            import fcntl, os, sys
            fd = os.open(sys.argv[1], os.O_RDONLY | os.O_DIRECTORY)
            fcntl.flock(fd, fcntl.LOCK_EX)
            print("locked", flush=True)
            sys.stdin.read()
        """), str(busy)], stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "locked"
        assert recover_leftovers(tmp_path / "set") == []
        assert busy.is_dir()
    finally:
        holder.stdin.close()
        holder.wait(timeout=60)
    assert recover_leftovers(tmp_path / "set") == ["removed .set.partial-live0000"]


# ---------------------------------------------------------------- real processes, real signals

# A child that runs ``cfarvec vectors`` through cli.main with the generator replaced by one that
# writes part of a file, prints a marker and then waits on its standard input: the signal always
# arrives while the staged folder is being written.
_WAITING_CHILD = """
import sys
import vectors.vector_set as vs

def waiting(spec, settings, folder):
    (folder / "stimulus.hex").write_text("0\\n")
    print("inside", folder, flush=True)
    sys.stdin.read()
    raise SystemExit("stdin closed before the signal")

vs._generate = waiting
from cfarvec import cli
raise SystemExit(cli.main(sys.argv[1:]))
"""

# A child whose first rename (previous output into .NAME.old-*/previous) is followed at once by
# SIGKILL: the moment between the two renames.
_KILLED_BETWEEN_RENAMES = """
import os, signal, sys
import refmodel.output_folder as of

real = os.replace

class _Os:
    def __getattr__(self, name):
        return getattr(os, name)

    @staticmethod
    def replace(src, dst):
        real(src, dst)
        if str(dst).endswith("previous"):
            os.kill(os.getpid(), signal.SIGKILL)

of.os = _Os()
from cfarvec import cli
raise SystemExit(cli.main(sys.argv[1:]))
"""


def _start(code: str, args: list[str], cwd: Path) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-c", code, *args], cwd=cwd, stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _previous_set(workdir: Path) -> bytes:
    assert cli.main(["vectors", "spec.toml", "-o", "out"]) == 0
    return (workdir / "out" / "manifest.json").read_bytes()


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGHUP, signal.SIGINT])
def test_terminating_signals_clean_up_like_ctrl_c(workdir, sig):
    before = _previous_set(workdir)
    child = _start(_WAITING_CHILD, ["vectors", "spec.toml", "-o", "out", "--force"], workdir)
    line = child.stdout.readline()
    assert line.startswith("inside"), child.stderr.read()
    child.send_signal(sig)
    _, err = child.communicate(timeout=120)
    assert child.returncode == 128 + sig, err
    assert len(err.splitlines()) == 1 and "interrupted" in err and "Traceback" not in err, err
    assert _hidden(workdir) == []
    assert (workdir / "out" / "manifest.json").read_bytes() == before


def test_sigkill_leftovers_are_removed_by_the_next_run(workdir):
    before = _previous_set(workdir)
    child = _start(_WAITING_CHILD, ["vectors", "spec.toml", "-o", "out", "--force"], workdir)
    assert child.stdout.readline().startswith("inside")
    child.kill()
    child.communicate(timeout=120)
    assert child.returncode == -signal.SIGKILL
    assert len(_hidden(workdir)) == 1  # what the issue saw: a hidden folder left behind
    assert (workdir / "out" / "manifest.json").read_bytes() == before
    assert cli.main(["vectors", "spec.toml", "-o", "out", "--force"]) == 0
    assert _hidden(workdir) == []


def test_kill_between_the_renames_never_loses_the_previous_output(workdir, capsys):
    before = _previous_set(workdir)
    child = _start(_KILLED_BETWEEN_RENAMES, ["vectors", "spec.toml", "-o", "out", "--force", "--seed", "7"],
                   workdir)
    child.communicate(timeout=300)
    assert child.returncode == -signal.SIGKILL
    assert not (workdir / "out").exists()  # the repro: the previous set only inside the hidden folder
    assert len(_hidden(workdir)) == 2
    # The next run, even one refused for a non-empty target, gives the previous set back first.
    assert cli.main(["vectors", "spec.toml", "-o", "out"]) == 2
    assert "not empty" in capsys.readouterr().err
    assert (workdir / "out" / "manifest.json").read_bytes() == before
    assert _hidden(workdir) == []


def test_sigterm_during_a_real_vector_run(workdir):
    """End to end, no stand-in: a set large enough to be still running when the signal comes."""
    text = (workdir / "spec.toml").read_text().replace("random_frames = 12", "random_frames = 100000")
    (workdir / "big.toml").write_text(text.replace("random_length_max = 90", "random_length_max = 400"))
    child = subprocess.Popen([sys.executable, "-m", "cfarvec", "vectors", "big.toml", "-o", "big"], cwd=workdir,
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        while not any((p / "stimulus.hex").is_file() and (p / "stimulus.hex").stat().st_size > 0
                      for p in workdir.glob(".big.partial-*")):
            assert child.poll() is None, child.communicate()
            time.sleep(0.02)  # a wait for the marker, not a timing assertion
        child.send_signal(signal.SIGTERM)
        _, err = child.communicate(timeout=300)
    finally:
        if child.poll() is None:
            child.kill()
    assert child.returncode == 128 + signal.SIGTERM, err
    assert "Traceback" not in err and _hidden(workdir) == [] and not (workdir / "big").exists()
