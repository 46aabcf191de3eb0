"""One sign-off scenario (data, results, ledger) shared by the report's tests."""
from __future__ import annotations

import pytest

from . import scenario


@pytest.fixture(scope="session")
def signed(tmp_path_factory):
    return scenario.build(tmp_path_factory.mktemp("signed"))


@pytest.fixture(scope="session")
def page(signed, tmp_path_factory):
    """The scenario's report, written once: ``(path, html)``."""
    output = tmp_path_factory.mktemp("page") / "report.html"
    done = scenario.report(signed["results"], signed["ledger"], output)
    assert done.returncode == 0, done.stderr
    return output, output.read_text(encoding="utf-8")
