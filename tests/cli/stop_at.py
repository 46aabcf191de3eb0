"""Run ``pricefold`` (its installed entry point) stopping itself (SIGSTOP) at one file operation, so that a test
can kill it there: ``python stop_at.py WHEN:CALL:NAME pricefold-arguments…``.

WHEN is ``before`` or ``after``, CALL ``replace`` (NAME: the name renamed to) or ``unlink`` (NAME: the name
removed), NAME a shell pattern matched against the file's name; only the first match stops."""
import fnmatch
import os
import signal
import sys

when, call, pattern = sys.argv[1].split(":")
real = getattr(os, call)
armed = [True]


def stopping(*args, **kwargs):
    target = os.path.basename(os.fspath(args[1] if call == "replace" else args[0]))
    hit = armed[0] and fnmatch.fnmatch(target, pattern)
    if hit:
        armed[0] = False
    if hit and when == "before":
        os.kill(os.getpid(), signal.SIGSTOP)
    done = real(*args, **kwargs)
    if hit and when == "after":
        os.kill(os.getpid(), signal.SIGSTOP)
    return done


setattr(os, call, stopping)
sys.argv = ["pricefold", *sys.argv[2:]]
from pricefold.cli import entry  # noqa: E402

entry()
