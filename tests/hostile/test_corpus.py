"""The hostile-input corpus (``cases.py``): every case's exit status, one line on stderr (none for a quiet
success but the rejected-rows warning), no traceback, no pre-existing file changed, nothing left behind by
a failure, and its checks."""
from __future__ import annotations

import re

import pytest

from .cases import CASES
from .harness import cleanup, run_case


# the warnings --quiet keeps (README): rejected rows, prices of 0, a plan file that prices only some series, the
# data's columns not read (the corpus' files have a week column most cases do not give as --date)
WARNING = re.compile(r"[\d,]+ rows? rejected: .+ — see \S|.*\bha(s|ve) a price of 0\b|.*: prices [\d,]+ of [\d,]+ series; the other "
                     r"|note: \S+\.rejects\.csv left as it was: |note: \S+: data columns? not used: ")


@pytest.fixture(scope="module")
def root(tmp_path_factory):
    import tempfile
    from pathlib import Path
    folder = Path(tempfile.mkdtemp(prefix="pricefold-corpus-"))
    folder.chmod(0o755)  # cases run as an unprivileged user must reach their folders
    yield folder
    cleanup(folder)


@pytest.mark.parametrize("case", CASES, ids=[case.id for case in CASES])
def test_case(case, root):
    outcome = run_case(case, root)
    assert not outcome.traceback, outcome.stderr
    assert outcome.code == case.code, outcome.stderr
    if case.says is None:  # a quiet success says nothing but the warnings --quiet keeps (README)
        assert outcome.stderr == "" or (outcome.code == 0 and all(
            WARNING.match(line) for line in outcome.stderr.splitlines())), outcome.stderr
    else:
        assert outcome.stderr_lines == 1 and case.says in outcome.stderr, outcome.stderr
    assert not outcome.changed, f"changed: {outcome.changed}"
    assert not outcome.new_after_failure, f"left behind: {outcome.new_after_failure}"
    assert not outcome.failed_checks, f"checks failed: {outcome.failed_checks}\n{outcome.stderr}"


def test_the_corpus_is_large_and_its_ids_unique():
    assert len(CASES) >= 150 and len({case.id for case in CASES}) == len(CASES)
