"""Running one corpus case: make its files, snapshot the folder, run the command, compare.

In-process runs call ``pricefold.cli.main`` with stdout and stderr captured (warnings recorded as
stderr lines, since that is where they would reach a user); subprocess runs use ``python -m pricefold``
with a time limit, so a hang or a native abort is seen as such.
"""
from __future__ import annotations

import hashlib
import io
import os
import shlex
import shutil
import subprocess
import sys
import tempfile
import traceback
import warnings
from contextlib import redirect_stderr, redirect_stdout
from dataclasses import dataclass, field
from pathlib import Path

from .files import make

NOBODY = 65534


@dataclass
class Outcome:
    code: int | None
    stderr: str
    traceback: bool
    changed: list = field(default_factory=list)   # pre-existing files changed or gone (minus those replaceable)
    new_after_failure: list = field(default_factory=list)
    failed_checks: list = field(default_factory=list)

    @property
    def stderr_lines(self) -> int:
        text = self.stderr.strip("\n")
        return text.count("\n") + 1 if text else 0


def in_process(argv: list[str], folder: Path) -> tuple[int | None, str, bool]:
    from pricefold.cli import main
    out, err = io.StringIO(), io.StringIO()
    here = os.getcwd()
    os.chdir(folder)
    crashed = False
    try:
        with redirect_stdout(out), redirect_stderr(err), warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                code = main(argv)
            except SystemExit as exc:  # argparse
                code = exc.code if isinstance(exc.code, int) else 2
            except BaseException:  # noqa: BLE001 - a traceback is what the corpus looks for
                crashed, code = True, None
                err.write(traceback.format_exc())
        for warning in caught:
            err.write(f"{warning.category.__name__}: {warning.message}\n")
    finally:
        os.chdir(here)
    return code, err.getvalue(), crashed


def in_subprocess(argv: list[str], folder: Path, python_path: str | None = None, user: int | None = None,
                  timeout: float = 120) -> tuple[int | None, str, bool]:
    env = dict(os.environ)
    if python_path:
        env["PYTHONPATH"] = python_path
    command = [sys.executable, "-m", "pricefold", *argv]
    if user is not None:
        command = ["setpriv", f"--reuid={user}", f"--regid={user}", "--clear-groups", *command]
        env["HOME"] = str(folder)
    try:
        done = subprocess.run(command, cwd=folder, capture_output=True, text=True, env=env, timeout=timeout,
                              stdin=subprocess.DEVNULL)
    except subprocess.TimeoutExpired:
        return None, f"timed out after {timeout} s", True
    crashed = done.returncode < 0 or done.returncode == 134 or "Traceback (most recent call last)" in done.stderr
    return done.returncode, done.stderr, crashed


def snapshot(folder: Path) -> dict[str, str]:
    out = {}
    for path in sorted(folder.rglob("*")):
        name = str(path.relative_to(folder))
        if path.is_symlink():
            out[name] = "link:" + os.readlink(path)
        elif path.is_fifo():
            out[name] = "fifo"
        elif path.is_dir():
            out[name] = "dir"
        else:
            out[name] = hashlib.sha256(path.read_bytes()).hexdigest()
    return out


def prepare(case, folder: Path, python_path: str | None = None) -> None:
    def run(argv):
        if python_path:
            return in_subprocess(argv, folder, python_path)[0]
        return in_process(argv, folder)[0]
    for name, how in case.files.items():
        make(folder, name, how, run)


def check(folder: Path, spec: str) -> bool:
    if spec.startswith("!"):
        return not (folder / spec[1:]).exists()
    name, sep, rest = spec.partition(" ")
    if not sep:
        return (folder / name).exists()
    relation, text = rest[0], rest[2:]
    try:
        body = (folder / name).read_bytes()
    except OSError:
        return False
    found = text.encode("utf-8", "surrogateescape") in body
    return found if relation == "∋" else not found


def run_case(case, root: Path, python_path: str | None = None) -> Outcome:
    """Run ``case`` in a fresh folder under ``root``; ``python_path`` runs another copy of pricefold (subprocess)."""
    folder = Path(tempfile.mkdtemp(prefix=case.id[:40] + "-", dir=root)) / "case"
    folder.mkdir()
    prepare(case, folder, python_path)
    argv = shlex.split(case.command)
    user = None
    if case.how == "nobody":
        if os.geteuid() == 0:
            for path in [folder, *folder.rglob("*")]:
                path.chmod(0o555 if path.is_dir() else 0o444)
            for parent in folder.parents:
                if parent == root.parent:
                    break
                parent.chmod(parent.stat().st_mode | 0o055)
            user = NOBODY
        else:
            folder.chmod(0o555)
    before = snapshot(folder)
    try:
        if case.how == "in-process" and not python_path or case.how == "nobody" and user is None:
            code, stderr, crashed = in_process(argv, folder)
        else:
            code, stderr, crashed = in_subprocess(argv, folder, python_path, user)
    finally:
        if case.how == "nobody" and user is None:
            folder.chmod(0o755)
    after = snapshot(folder)
    outcome = Outcome(code, stderr, crashed)
    outcome.changed = [name for name, digest in before.items()
                       if after.get(name) != digest and name not in case.replaces]
    if code != 0:
        outcome.new_after_failure = sorted(set(after) - set(before))
    outcome.failed_checks = [spec for spec in case.checks if not check(folder, spec)]
    return outcome


def cleanup(root: Path) -> None:
    for path in root.rglob("*"):
        if path.is_dir() and not path.is_symlink():
            path.chmod(0o755)
    shutil.rmtree(root, ignore_errors=True)
