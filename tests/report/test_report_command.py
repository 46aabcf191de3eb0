"""``pricefold report`` as a user runs it: the page's content, its safety, its guards and its errors.

Numbers on the page are checked against the results file as written by ``pricefold fit`` (read
here with ``json``), formatted the way the README says they read.
"""
from __future__ import annotations

import base64
import hashlib
import json
import re
import shutil
import subprocess
import sys

import pytest

from . import scenario


def hashes(html: str) -> tuple[str, str]:
    def digest(text):
        return "sha256-" + base64.b64encode(hashlib.sha256(text.encode()).digest()).decode()
    style = re.search(r"<style>(.*?)</style>", html, re.S).group(1)
    script = re.search(r"<script>(.*?)</script>", html, re.S).group(1)
    return digest(style), digest(script)


def test_the_page_counts_escapes_and_loads_nothing(signed, page):
    _, html = page
    assert "<script>alert(1)" not in html and "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "\x1b" not in html and "\x07" not in html
    assert "\u241b[2J\u241b]2;owned\u2407 wipe" in html and "odd name \u241b[31mred" in html
    assert "<img" not in html and "&lt;img src=x onerror=alert(2)&gt;" in html  # the override's note
    assert "ben &lt;i&gt;" in html
    assert len(re.findall(r"<script\b", html)) == 1 and " style=" not in html
    policy = re.search(r'http-equiv="Content-Security-Policy" content="([^"]+)"', html).group(1)
    style, script = hashes(html)
    assert policy.startswith("default-src 'none';") and f"style-src '{style}'" in policy
    assert f"script-src '{script}'" in policy and "unsafe" not in policy
    assert not re.search(r'(src|href)="(?!#)', html.replace('xlink:href="#', "").replace(
        'xmlns="http://www.w3.org/2000/svg"', "").replace('xmlns:xlink="http://www.w3.org/1999/xlink"', ""))
    cards = dict((word, int(n.replace(",", ""))) for n, word in re.findall(
        r'<li><span class="n">([\d,]+)</span>(\w+)', html))
    results = json.loads(signed["results"].read_text())
    unflagged = sum(1 for s in results["series"] if not s["flags"] and s["chosen"])
    # the override replaces one bulk accept; the accept past a stop flag adds one
    assert cards == {"series": 183, "accepted": unflagged, "overridden": 1, "held": 1,
                     "pending": 183 - unflagged - 2, "stale": 0}
    assert html.count("<article class=\"exception\"") == 1 + 1 + 3 + len(
        [s for s in results["series"] if any(f["severity"] == "stop" for f in s["flags"])
         and (s["key"]["product"], s["key"]["region"]) not in (signed["hold"] + signed["note"] + signed["override"])])
    assert html.count("<svg ") == html.count("<article class=\"exception\"")


def test_a_row_shows_the_standing_model_and_its_numbers(signed, page):
    _, html = page
    results = json.loads(signed["results"].read_text())
    lemons = next(s for s in results["series"] if s["key"] == {"product": "lemons 500 g", "region": "East"})
    row = re.search(r'<tr data-status="held">(.*?)</tr>', html).group(1)
    plan = lemons["plan"]
    minus = lambda x: f"{x:,.1f}".replace("-", "−")  # noqa: E731 - values in the hundreds read with one decimal
    assert "lemons 500 g · East" in row and lemons["chosen"] in row
    assert f"{minus(plan['volume'])} <span class=\"muted\">({minus(plan['lo'])} to {minus(plan['hi'])})" in row
    assert "ask the buyer" in row and "ben &lt;i&gt;" in row
    # its plan volume is below zero: no elasticity (a ratio of relative changes), as on the screen and in show
    assert plan["volume"] < 0 and '<span title="no elasticity: the volume is at or below zero">n/a</span>' in row
    assert plan["elasticity"] is None and lemons["chosen"] == "poly1"  # none stored either
    a, b = next(c for c in lemons["candidates"] if c["name"] == "poly1")["coef"]
    assert f"{abs(b * plan['price'] / (a + b * plan['price'])):.2f}" not in row  # what dV/dP·P/V would say


def test_the_override_stands_with_its_own_numbers(signed, page):
    _, html = page
    results = json.loads(signed["results"].read_text())
    key = {"product": scenario.HOSTILE[0], "region": "North"}
    series = next(s for s in results["series"] if s["key"] == key)
    model = next(c for c in series["candidates"] if c["name"] == signed["override_model"])
    row = re.search(r'<tr data-status="overridden">(.*?)</tr>', html).group(1)
    assert f"{signed['override_model']} <span class=\"muted\">(proposal {series['chosen']})" in row
    assert f"{model['plan_volume']:,.1f}" in row or f"{model['plan_volume']:,.0f}" in row


def test_a_broken_ledger_is_the_first_thing_on_the_page(signed, tmp_path):
    broken = tmp_path / "ledger.jsonl"
    lines = signed["ledger"].read_text().splitlines(keepends=True)
    lines[4] = lines[4].replace('"accept"', '"hold"')
    broken.write_text("".join(lines))
    out = tmp_path / "report.html"
    done = scenario.report(signed["results"], broken, out, "--title", "<b>Q1 plan</b>")
    assert done.returncode == 0 and "ledger broken" in done.stderr
    assert "<title>&lt;b&gt;Q1 plan&lt;/b&gt;</title>" in out.read_text()
    body = out.read_text().split("<body>", 1)[1]
    assert body.index("The ledger's chain is broken:</strong> line 5: record was edited") < body.index("<h2>Summary")


def test_a_ledger_ending_in_a_torn_write_is_said_on_the_page_and_on_stderr(signed, tmp_path):
    """Before: the command's line said "ledger intact" and nothing more, and the page named only the first of
    the tail's two notes (the incomplete batch, not the torn line after it)."""
    torn = tmp_path / "ledger.jsonl"
    torn.write_bytes(signed["ledger"].read_bytes()[:-60])  # the last record cut short
    out = tmp_path / "report.html"
    done = scenario.report(signed["results"], torn, out)
    assert done.returncode == 0 and "ledger intact" in done.stderr
    assert f"pricefold report: {torn}: note: The ledger ends in an interrupted append (" in done.stderr
    assert "torn last line" in done.stderr and "torn last line" in out.read_text()


def test_a_keyed_ledger_without_its_key_is_said_first(tmp_path):
    built = scenario.build(tmp_path, key=b"k3y")
    out = tmp_path / "report.html"
    done = scenario.report(built["results"], built["ledger"], out, env={"PRICEFOLD_LEDGER_KEY": ""})
    body = out.read_text().split("<body>", 1)[1]
    assert done.returncode == 0 and body.index("could not be verified") < body.index("<h2>Summary")
    done = scenario.report(built["results"], built["ledger"], out, env={"PRICEFOLD_LEDGER_KEY": "k3y"})
    text = out.read_text()
    head = scenario.records(built["ledger"])[-1]
    assert "could not be verified" not in text and f"{head['seq']}:{head['digest']}" in text
    assert "intact: every record" in text and "keyed HMAC-SHA-256" in text


def test_parquet_results_in_a_folder_without_their_data(signed, tmp_path):
    results = tmp_path / "results.parquet"
    scenario.fit(signed["data"], signed["plan"], results)
    folder = tmp_path / "folder.parquet"  # the layout fit --engine dask writes
    folder.mkdir()
    shutil.copy(results, folder / "part-00000.parquet")
    (folder / "_summary.json").write_text("{}")
    moved = signed["data"].with_name("moved.csv")
    signed["data"].rename(moved)
    try:
        out = tmp_path / "report.html"
        done = scenario.report(folder, signed["ledger"], out)
        assert done.returncode == 0, done.stderr
        html = out.read_text()
        assert "is missing. The charts show the fitted curves without the observations" in html
        assert html.count("<svg ") == html.count("<article class=\"exception\"") > 3
        assert "observed" not in re.search(r"<svg .*?</svg>", html, re.S).group(0)
        done = scenario.report(signed["results"], signed["ledger"], tmp_path / "other.html")
        assert done.returncode == 2 and done.stderr.count("\n") == 1 and "Traceback" not in done.stderr
        assert "is missing; a JSON results file is reported by refitting its data" in done.stderr
    finally:
        moved.rename(signed["data"])


def test_never_writes_over_an_input_or_a_file_it_did_not_make(signed, tmp_path):
    for target in (signed["ledger"].with_suffix(".html"), tmp_path / "notes.html"):
        target.write_text("<p>mine</p>")
        done = scenario.report(signed["results"], signed["ledger"], target)
        assert done.returncode == 2 and "is not a page written by pricefold report" in done.stderr
        assert target.read_text() == "<p>mine</p>"
    done = scenario.report(signed["results"], signed["ledger"], signed["results"])
    assert done.returncode == 2 and "expected -o to name an .html file" in done.stderr


def test_without_matplotlib_it_says_how_to_get_it(signed, tmp_path):
    code = ("import sys; sys.modules['matplotlib'] = None; from pricefold.cli import main; "
            f"sys.exit(main(['report', {str(signed['results'])!r}, '-o', {str(tmp_path / 'r.html')!r}]))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 2 and not (tmp_path / "r.html").exists()
    assert done.stderr == ("pricefold report: the report's charts need matplotlib: pip install matplotlib (or, in "
                           "the checkout, pip install -e '.[report]')\n")


def test_no_cache_folder_for_matplotlib_is_not_said(signed, tmp_path):
    """A trial with HOME not writable: matplotlib's "mkdir -p failed …" and "created a temporary cache directory …"
    on stderr around the report's one line (it works in a temporary folder: the report caches nothing)."""
    import os
    out = tmp_path / "r.html"
    done = subprocess.run([sys.executable, "-m", "pricefold", "report", str(signed["results"]), "--ledger",
                           str(signed["ledger"]), "-o", str(out)], capture_output=True, text=True,
                          env={**os.environ, "MPLCONFIGDIR": str(signed["results"]) + "/mpl"})  # under a file
    assert done.returncode == 0 and out.exists()
    assert done.stderr.count("\n") == 1 and done.stderr.startswith("report of "), done.stderr


def test_the_demo_prints_the_command_that_makes_its_report(tmp_path, monkeypatch, capsys):
    from pricefold import cli, demo, triage_cli
    monkeypatch.setattr(triage_cli, "open_triage", lambda *args, **kwargs: 0)
    monkeypatch.setattr("pricefold.terminal.require_terminal", lambda what: None)  # its screen is stubbed
    folder, pricefold = tmp_path / "demo", demo.typed_command()  # as typed here: bare or the command's path
    assert cli.main(["demo", "--dir", str(folder)]) == 0
    said = capsys.readouterr().err.splitlines()
    line = next(line for line in said if f"{pricefold} report" in line)
    command = line.split(": ", 1)[1].split("  (")[0].split()
    again = next(line for line in said if line.startswith("back to it: "))  # the demo's own ledger, named
    assert again.split(": ", 1)[1].split() == [pricefold, "triage", str(folder / "results.parquet"), "--ledger",
                                               str(folder / "ledger.jsonl")]
    assert command[:2] == [pricefold, "report"]
    assert cli.main(command[1:]) == 2  # the stubbed triage recorded nothing: no ledger yet, which report says
    (folder / "ledger.jsonl").touch()  # a ledger (empty) as a session leaves one
    assert cli.main(command[1:]) == 0
    assert "Sign-off report" in (folder / "report.html").read_text()


def test_charts_drawn_by_two_processes_are_the_ones_drawn_by_one(signed, tmp_path, monkeypatch):
    from pricefold import cli
    from pricefold.report import command
    pages = []
    for start in (10**9, 1):  # one process; then two, from the first chart on
        monkeypatch.setattr(command, "PARALLEL_FROM", start)
        out = tmp_path / f"report-{start}.html"
        assert cli.main(["report", str(signed["results"]), "--ledger", str(signed["ledger"]), "-o", str(out)]) == 0
        # the minute it was made, and the page's seal that hashes it, may differ between the two runs
        pages.append(re.sub(r"Made [^<]* by|sha256:[0-9a-f]{64}", "", out.read_text()))
    assert pages[0] == pages[1] and pages[0].count("<svg ") > 10


def test_the_charted_series_fitted_alone_give_the_whole_fit_numbers(signed, tmp_path):
    import numpy as np

    from fitcore.results.stored import stored_results
    from fitcore.review.evidence import band
    from pricefold.report.command import fit_subset
    from tui.factory import source_from_results
    results_path = tmp_path / "results.parquet"
    scenario.fit(signed["data"], signed["plan"], results_path)
    whole, _ = stored_results(results_path)
    picked = [0, 7, 90, 181, 182]
    alone = fit_subset(source_from_results(results_path, check_data=False), [whole.data.key_of(s) for s in picked])
    assert alone.n_series == len(picked)
    for s in picked:
        a = next(i for i in range(alone.n_series) if alone.data.key_of(i) == whole.data.key_of(s))
        c = int(whole.chosen[s])
        assert alone.chosen[a] == c and alone.data.fingerprint_of(a) == whole.data.fingerprint_of(s)
        lo, hi = band(alone, a, c, np.array([whole.plan_price[s]]))
        np.testing.assert_allclose([alone.plan_volume[a, c], lo[0], hi[0]],
                                   [whole.plan_volume[s, c], whole.plan_lo[s, c], whole.plan_hi[s, c]], rtol=1e-9)


def test_a_missing_ledger_named_is_an_error_and_nothing_is_written(signed, tmp_path):
    """A mistyped --ledger is one line and exit 2 (as fit, show, carry and export say it), not a page where
    everything is pending."""
    missing, page = tmp_path / "lede.jsonl", tmp_path / "report.html"
    done = scenario.report(signed["results"], missing, page)
    assert done.returncode == 2, done.stderr
    assert done.stderr.count("\n") == 1 and f"{missing}: no such ledger" in done.stderr
    assert "Traceback" not in done.stderr and sorted(p.name for p in tmp_path.iterdir()) == []


def test_the_page_says_when_the_rejects_file_is_not_the_one_the_results_record(tmp_path):
    """Before: a rejects file edited, or replaced by a run killed between the two renames, went unnoticed."""
    from pricefold.report.page import rejects_state
    results = tmp_path / "r.json"
    (tmp_path / "r.rejects.csv").write_text("product,line,reason\na,5,non-numeric price\n")
    import hashlib
    header = {"input": {"rejects_file": "r.rejects.csv",
                        "rejects_sha256": hashlib.sha256((tmp_path / "r.rejects.csv").read_bytes()).hexdigest()}}
    assert rejects_state(header, str(results)) == ""
    with open(tmp_path / "r.rejects.csv", "a") as handle:
        handle.write("mine\n")
    assert "is not the rejects file these results record" in rejects_state(header, str(results))
    (tmp_path / "r.rejects.csv").unlink()
    assert rejects_state(header, str(results)) == f"; its rejects file {tmp_path / 'r.rejects.csv'} is missing"
    assert rejects_state({"input": {"rejects_file": None}}, str(results)) == ""


def _children(pid: int) -> list[int]:
    from pathlib import Path
    found = []
    for task in Path(f"/proc/{pid}/task").glob("*"):
        try:
            found += [int(c) for c in (task / "children").read_text().split()]
        except OSError:
            pass
    return found


def _alive(pid: int) -> bool:
    from pathlib import Path
    try:
        state = next(line for line in Path(f"/proc/{pid}/status").read_text().splitlines() if line.startswith("State"))
    except (OSError, StopIteration):
        return False
    return "Z" not in state.split()[1]  # a zombie has ended, waiting only to be reaped


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc for the drawing processes")
def test_a_killed_report_leaves_no_drawing_process_behind(signed, tmp_path):
    """A trial killed a report (SIGKILL) while it drew: its two drawing processes went on for minutes."""
    import os
    import signal
    import time
    output = tmp_path / "report.html"
    every_chart_in_two = ("import sys; from pricefold.report import command; command.PARALLEL_FROM = 1; "
                          "from pricefold.cli import main; sys.exit(main(sys.argv[1:]))")
    run = subprocess.Popen([sys.executable, "-c", every_chart_in_two, "report", str(signed["results"]), "--ledger",
                            str(signed["ledger"]), "-o", str(output)], stdout=subprocess.DEVNULL,
                           stderr=subprocess.DEVNULL)
    drawing, until = [], time.monotonic() + 60
    while len(drawing) < 2 and run.poll() is None and time.monotonic() < until:
        drawing = _children(run.pid)
        time.sleep(0.01)
    assert len(drawing) == 2, "the report never drew in two processes"
    os.kill(run.pid, signal.SIGKILL)
    run.wait()
    until = time.monotonic() + 10
    while any(_alive(pid) for pid in drawing) and time.monotonic() < until:
        time.sleep(0.05)
    left = [pid for pid in drawing if _alive(pid)]
    for pid in left:
        os.kill(pid, signal.SIGKILL)
    assert not left and not output.exists()


def test_the_settings_say_whether_the_fit_was_weighted(tmp_path, page):
    """A weighted fit is another model (a carry never crosses a change of weighting); a trial's report of one did
    not say it was weighted."""
    from pathlib import Path

    from pricefold import cli
    assert "<dt>Weights</dt><dd>none (every row counts alike)</dd>" in page[1]
    data = tmp_path / "w.csv"
    rows = (Path(__file__).parents[2] / "sample" / "wholesale.csv").read_text().splitlines()
    data.write_text("\n".join([rows[0] + ",w"] + [row + ",2" for row in rows[1:]]) + "\n")
    results = tmp_path / "w.json"
    assert cli.main(["fit", str(data), "--segment", "region", "--date", "week", "--weight", "w", "-o", str(results),
                     "-q"]) == 0
    assert cli.main(["ledger", "accept-unflagged", str(results), "--ledger", str(tmp_path / "L.jsonl"), "-q"]) == 0
    out = tmp_path / "w.html"
    assert cli.main(["report", str(results), "--ledger", str(tmp_path / "L.jsonl"), "-o", str(out)]) == 0
    assert ("<dt>Weights</dt><dd>column <code>w</code> (rows of weight 0 count for nothing; intervals are for a week "
            "weighing as much as its series' average row of positive weight)</dd>") in out.read_text()
