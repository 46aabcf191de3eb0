"""``pricefold ledger``: verify, show, export, accept-unflagged (also four at once)."""
from __future__ import annotations

import csv
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

SAMPLE = Path(__file__).parents[2] / "sample"


def run_cli(*args, env=None):
    import os
    return subprocess.run([sys.executable, "-m", "pricefold", *args], capture_output=True, text=True,
                          env=None if env is None else {**os.environ, **env})


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    path = tmp_path_factory.mktemp("ledger") / "results.json"
    assert run_cli("fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                   "--plan", str(SAMPLE / "plan.csv"), "-o", str(path), "--quiet").returncode == 0
    return path


def unflagged(path):
    return {json.dumps(s["key"], sort_keys=True) for s in json.loads(path.read_text())["series"]
            if not s["flags"] and s["chosen"]}


def test_four_bulk_accepts_at_once_record_each_series_once(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    runs = [subprocess.Popen([sys.executable, "-m", "pricefold", "ledger", "accept-unflagged", str(results),
                              "--ledger", str(ledger_path), "--analyst", f"analyst{k}"],
                             stderr=subprocess.PIPE, text=True) for k in range(4)]
    for run in runs:
        assert run.wait(60) == 0, run.stderr.read()
    records = [json.loads(line) for line in ledger_path.read_text().splitlines()]
    keys = [json.dumps(r["series"], sort_keys=True) for r in records]
    assert sorted(keys) == sorted(unflagged(results))  # once each, nothing flagged
    assert [r["seq"] for r in records] == list(range(1, len(records) + 1))
    done = run_cli("ledger", "verify", str(ledger_path))
    assert done.returncode == 0 and f"intact, {len(records)} records" in done.stdout


def test_verify_names_the_broken_line_and_fails(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path))
    data = ledger_path.read_text().splitlines(keepends=True)
    data[4] = data[4].replace('"note":""', '"note":"edited"')  # accepts carry a signed model: edit the note
    ledger_path.write_text("".join(data))
    done = run_cli("ledger", "verify", str(ledger_path))
    assert done.returncode == 1
    assert done.stdout.strip().splitlines()[0].endswith("line 5: record was edited: its digest does not match its content")


def test_verify_keeps_its_status_when_the_reader_stops_early_and_counts_a_cascade(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path))
    data = ledger_path.read_text().splitlines(keepends=True)
    ledger_path.write_text("".join(data[:2] + data[3:]))  # one record of the batch deleted
    done = run_cli("ledger", "verify", str(ledger_path))
    lines = done.stdout.strip().splitlines()
    assert done.returncode == 1 and "line 3: chain broken" in lines[0]
    assert len(lines) == 21 and lines[-1].endswith(f"… and {len(data) - 1 - 20:,} more problems after line 20 "
                                                   "(the first ones explain the rest)")
    piped = subprocess.run(f"{sys.executable} -m pricefold ledger verify {ledger_path} 2>&1 | head -1; "
                           "exit ${PIPESTATUS[0]}", shell=True, executable="/bin/bash", capture_output=True, text=True)
    assert piped.returncode == 1 and piped.stdout.count("\n") == 1  # `| head -1` does not turn a break into 0


@pytest.mark.parametrize("name", ["results.parquet", "plan.csv", "results.json"])
def test_verify_of_a_file_that_is_no_ledger_at_all_says_so_in_one_line(name, results):
    """A results or plan file given as the ledger: one line saying so, not twenty 'not a valid JSON record'
    (nor, for a JSON results file, one line, "the last line … is not the start of a ledger record")."""
    done = run_cli("ledger", "verify", str(results if name == "results.json" else SAMPLE / name))
    assert done.returncode == 1 and done.stdout.count("\n") == 1
    assert done.stdout.endswith(f"{name}: not a ledger: no line of it is a ledger record (a ledger holds one JSON "
                                "record a line; a results, data or plan file given in its place?)\n")


def test_verify_with_the_wrong_key_says_so_first(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path),
            env={"PRICEFOLD_LEDGER_KEY": "right"})
    done = run_cli("ledger", "verify", str(ledger_path), env={"PRICEFOLD_LEDGER_KEY": "wrong"})
    assert done.returncode == 1 and "most likely the wrong key" in done.stdout.splitlines()[0]
    assert run_cli("ledger", "verify", str(ledger_path), env={"PRICEFOLD_LEDGER_KEY": "right"}).returncode == 0


@pytest.mark.parametrize("command", [["revoke", "--batch", "1", "--note", "n"], ["show"]])
def test_other_readers_with_the_wrong_key_name_the_key_too(tmp_path, results, command):
    """Not only ``verify``: a writer refusing, or ``show`` warning, says a keyed digest may not match because
    of the key, not only because the record was edited."""
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path),
            env={"PRICEFOLD_LEDGER_KEY": "right"})
    before = ledger_path.read_bytes()
    done = run_cli("ledger", command[0], str(ledger_path), *command[1:], env={"PRICEFOLD_LEDGER_KEY": "wrong"})
    assert "line 1: record was edited, or signed with another key than PRICEFOLD_LEDGER_KEY" in done.stderr
    assert ledger_path.read_bytes() == before


@pytest.mark.parametrize("command", [["ledger", "show"], ["ledger", "export", "--results", "R", "-o", "OUT"],
                                     ["show", "R", "--ledger"]])
def test_a_mistyped_ledger_is_an_error_for_commands_that_only_read_it(tmp_path, results, command):
    missing = tmp_path / "ledgr.jsonl"
    args = [str(results) if a == "R" else str(tmp_path / "x.csv") if a == "OUT" else a for a in command]
    done = run_cli(*(args + [str(missing)] if command[0] == "show" else args[:2] + [str(missing)] + args[2:]))
    assert done.returncode == 2 and done.stderr.strip().endswith(f"{missing}: no such ledger (a command that only "
                                                                 "reads one needs it to exist)")
    assert sorted(tmp_path.iterdir()) == []


def test_keyed_ledger_needs_its_key(tmp_path, results):
    ledger_path = tmp_path / "keyed.jsonl"
    env = {"PRICEFOLD_LEDGER_KEY": "k3y"}
    assert run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path), env=env).returncode == 0
    assert run_cli("ledger", "verify", str(ledger_path), env=env).returncode == 0
    assert run_cli("ledger", "verify", str(ledger_path), env={"PRICEFOLD_LEDGER_KEY": "wrong"}).returncode == 1


def test_export_gives_status_model_and_plan_per_series(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path), "--analyst", "ana")
    out = tmp_path / "decisions.csv"
    done = run_cli("ledger", "export", str(ledger_path), "--results", str(results), "-o", str(out))
    assert done.returncode == 0, done.stderr
    rows = list(csv.DictReader(out.open()))
    assert len(rows) == 180
    accepted = [r for r in rows if r["status"] == "accepted"]
    assert len(accepted) == len(unflagged(results)) and all(r["analyst"] == "ana" for r in accepted)
    assert {r["status"] for r in rows} == {"accepted", "pending"}
    series = {(s["key"]["product"], s["key"]["region"]): s for s in json.loads(results.read_text())["series"]}
    row = accepted[0]
    record = series[(row["product"], row["region"])]
    chosen = next(c for c in record["candidates"] if c["name"] == record["chosen"])
    assert row["model"] == record["chosen"] and json.loads(row["coef"]) == chosen["coef"]
    assert float(row["plan_volume"]) == pytest.approx(record["plan"]["volume"])


def test_show_lists_decisions(tmp_path, results):
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path), "--analyst", "ana")
    done = run_cli("ledger", "show", str(ledger_path), "--product", "apples 1 kg")
    shown = done.stdout.strip().splitlines()
    assert done.returncode == 0 and 1 <= len(shown) <= 3
    assert all("apples 1 kg" in line and " ana " in line and "accept" in line for line in shown)
    # a product column no series has, without --product, listed everything silently (a trial): said, as with it
    done = run_cli("ledger", "show", str(ledger_path), "--product-column", "nosuch")
    assert done.returncode == 2 and done.stdout == "" and done.stderr.strip().endswith(
        "no series has a product column 'nosuch' (the key columns: product, region); name it with --product-column")
    # a product column from a settings file in the folder: said where the name came from (a trial never typed it)
    (tmp_path / "pricefold.toml").write_text('[columns]\nproduct = "item"\n')
    done = subprocess.run([sys.executable, "-m", "pricefold", "ledger", "show", str(ledger_path), "--product", "x"],
                          capture_output=True, text=True, cwd=tmp_path,
                          env={**os.environ, "PYTHONPATH": str(Path(__file__).parents[2])})
    assert "no series has a product column 'item' — the settings file's [columns] product, in the current folder" \
        in done.stderr


def test_ledger_errors_are_one_line(tmp_path):
    done = run_cli("ledger", "verify", str(tmp_path / "missing.jsonl"))
    assert done.returncode == 2 and "missing.jsonl: file not found" in done.stderr and "Traceback" not in done.stderr


# -- the head witness, refusals, odd files -------------------------------------------------------
def cli(*args, capsys):
    """``pricefold`` in this process (faster than a subprocess): exit code, stdout, stderr."""
    from pricefold.cli import main
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_verify_prints_the_head_and_checks_a_witnessed_one(tmp_path, results, capsys, monkeypatch):
    monkeypatch.setenv("PRICEFOLD_LEDGER_KEY", "k3y")
    ledger_path = tmp_path / "keyed.jsonl"
    code, _, err = cli("ledger", "accept-unflagged", results, "--ledger", ledger_path, capsys=capsys)
    assert code == 0 and err.splitlines()[-1].startswith("ledger head ")
    from fitcore import ledger
    from pricefold.ledger_cli import identity
    book = ledger.Ledger(ledger_path, b"k3y")
    assert err.splitlines()[-1] == f"ledger head {book.head_text}"
    flagged = next(s for s in json.loads(results.read_text())["series"] if s["flags"])
    book.append([ledger.Entry(series=flagged["key"], action="hold", fingerprint=flagged["fingerprint"],
                              results="r", note="ask the buyer")], identity(None))
    head = book.head_text
    code, out, _ = cli("ledger", "verify", ledger_path, capsys=capsys)
    assert code == 0 and out.splitlines()[-1] == f"head {head}"
    assert cli("ledger", "verify", ledger_path, "--head", head, capsys=capsys)[0] == 0
    # Someone who can write the file but lacks the key drops the last record: the chain still
    # verifies (nothing file-local can tell), but the witnessed head does not.
    data = ledger_path.read_bytes().splitlines(keepends=True)
    ledger_path.write_bytes(b"".join(data[:-1]))
    code, out, _ = cli("ledger", "verify", ledger_path, capsys=capsys)
    assert code == 0 and f"intact, {len(data) - 1} records" in out
    code, out, _ = cli("ledger", "verify", ledger_path, "--head", head, capsys=capsys)
    assert code == 1 and out.splitlines()[-1].endswith(
        f"does not hold the witnessed record {head[:head.index(':') + 13]}…; it ends at seq {len(data) - 1}: "
        "records were removed from the end")
    code, _, err = cli("ledger", "verify", ledger_path, "--head", "12:abc", capsys=capsys)
    assert code == 2 and "expected --head as SEQ:DIGEST" in err


def test_accept_unflagged_records_supersedes_and_flags_and_is_quiet_when_asked(tmp_path, results, capsys):
    ledger_path = tmp_path / "l.jsonl"
    code, out, err = cli("ledger", "accept-unflagged", results, "--ledger", ledger_path, "-q", capsys=capsys)
    assert code == 0 and out == err == ""
    records = [json.loads(line) for line in ledger_path.read_text().splitlines()]
    assert {r["supersedes"] for r in records} == {None} and {tuple(r["flags"]) for r in records} == {()}
    assert len({r["batch"]["id"] for r in records}) == 1 and records[-1]["batch"]["size"] == len(records)
    code, _, err = cli("ledger", "accept-unflagged", results, "--ledger", ledger_path, capsys=capsys)
    assert code == 0 and "accepted 0 unflagged" in err  # nothing left undecided


def test_accepting_nothing_starts_no_ledger(tmp_path, capsys):
    """Every series flagged (few-points under a raised threshold): nothing to accept, and no empty ledger left
    to read as one begun (a trial found one)."""
    flagged, ledger_path = tmp_path / "flagged.json", tmp_path / "new.jsonl"
    assert run_cli("fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "--threshold",
                   "min_points=500", "-o", str(flagged), "-q").returncode == 0
    code, _, err = cli("ledger", "accept-unflagged", flagged, "--ledger", ledger_path, capsys=capsys)
    assert code == 0 and not ledger_path.exists()
    assert err == f"accepted 0 unflagged series: every series carries a flag or has no model, so no ledger was " \
                  f"started at {ledger_path}\n"
    code, _, err = cli("ledger", "accept-unflagged", flagged, "--ledger", tmp_path / "no" / "l.jsonl", capsys=capsys)
    assert code == 2 and "cannot start a ledger there" in err and not (tmp_path / "no").exists()  # a typo said


def test_a_broken_or_unverifiable_ledger_is_refused_by_writers_and_exports(tmp_path, results, capsys, monkeypatch):
    ledger_path, out = tmp_path / "l.jsonl", tmp_path / "out.csv"
    cli("ledger", "accept-unflagged", results, "--ledger", ledger_path, "--analyst", "ana", capsys=capsys)
    data = ledger_path.read_text().splitlines(keepends=True)
    data[2] = data[2].replace('"ana"', '"bo"')
    ledger_path.write_text("".join(data))
    before = ledger_path.read_bytes()
    for args in (("ledger", "accept-unflagged", results, "--ledger", ledger_path),
                 ("ledger", "export", ledger_path, "--results", results, "-o", out)):
        code, _, err = cli(*args, capsys=capsys)
        assert code == 2 and len(err.splitlines()) == 1
        assert "line 3: record was edited" in err and "the chain is broken, so nothing was done" in err
    assert ledger_path.read_bytes() == before and not out.exists()
    # show prints it all, after one warning line
    code, shown, err = cli("ledger", "show", ledger_path, capsys=capsys)
    assert code == 0 and err.splitlines()[0].startswith(f"{ledger_path}: warning: the chain is broken at line 3")
    assert len(shown.splitlines()) == len(data)
    # A keyed ledger read without its key: read-only (export warns), writers refuse.
    keyed = tmp_path / "keyed.jsonl"
    monkeypatch.setenv("PRICEFOLD_LEDGER_KEY", "k3y")
    cli("ledger", "accept-unflagged", results, "--ledger", keyed, capsys=capsys)
    monkeypatch.delenv("PRICEFOLD_LEDGER_KEY")
    code, _, err = cli("ledger", "accept-unflagged", results, "--ledger", keyed, capsys=capsys)
    assert code == 2 and len(err.splitlines()) == 1
    assert "line 1: keyed digest: set PRICEFOLD_LEDGER_KEY to verify it; it cannot be verified without" in err
    code, _, err = cli("ledger", "export", keyed, "--results", results, "-o", out, capsys=capsys)
    assert code == 0 and "warning: keyed records and no PRICEFOLD_LEDGER_KEY" in err.splitlines()[0]


def test_show_names_the_os_user_when_the_display_name_differs(tmp_path, results, capsys):
    ledger_path = tmp_path / "l.jsonl"
    cli("ledger", "accept-unflagged", results, "--ledger", ledger_path, "--analyst", "Ana S.", capsys=capsys)
    from pricefold.ledger_cli import identity
    user = identity(None).os_user
    _, shown, _ = cli("ledger", "show", ledger_path, "--product", "apples 1 kg", capsys=capsys)
    assert shown and all(f" Ana S. ({user}) " in line for line in shown.splitlines())
    cli("ledger", "accept-unflagged", results, "--ledger", tmp_path / "m.jsonl", capsys=capsys)
    _, shown, _ = cli("ledger", "show", tmp_path / "m.jsonl", "--product", "apples 1 kg", capsys=capsys)
    assert shown and all(f" {user} " in line and "(" not in line for line in shown.splitlines())


@pytest.mark.parametrize("kind", ["fifo", "folder"])
def test_a_ledger_that_is_not_a_file_is_one_line(tmp_path, results, kind):
    import os
    path = tmp_path / "odd.jsonl"
    os.mkfifo(path) if kind == "fifo" else path.mkdir()
    words = "a FIFO (named pipe)" if kind == "fifo" else "a folder"
    for args in (("ledger", "verify", path), ("ledger", "show", path),
                 ("ledger", "export", path, "--results", results, "-o", tmp_path / "x.csv"),
                 ("ledger", "accept-unflagged", results, "--ledger", path)):
        done = subprocess.run([sys.executable, "-m", "pricefold", *map(str, args)], capture_output=True, text=True,
                              timeout=60)
        assert done.returncode == 2 and done.stderr.strip().endswith(f"{path}: expected a ledger file, found {words}")
        assert len(done.stderr.splitlines()) == 1


def _killable_bulk(results, ledger_path, ready):
    from pricefold.cli import main
    from tests.fitcore.ledger_support import slow_disk
    # the kill is timed from the first write, not from the start: on a busy machine reading the results and
    # the ledger took longer than the kill's window, and every kill fell before the append (flaky)
    slow_disk(chunk=1024, first=ready.set)
    main(["ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path), "-q"])


def test_accept_unflagged_killed_at_random_moments_lands_whole_or_not_at_all(tmp_path, results):
    import random

    from fitcore import ledger
    from fitcore.review import flags  # noqa: F401 - loaded before forking, as the command's own imports are
    from tests.fitcore.ledger_support import kill_at_random, whole_batches
    rng = random.Random(1)
    expected = len(unflagged(results))
    outcomes = {"none": 0, "whole": 0, "interrupted": 0}
    for k in range(40):
        path = tmp_path / f"l{k}.jsonl"
        kill_at_random(_killable_bulk, (results, path), rng, 0.12)
        book = ledger.Ledger(path)
        assert book.state == "intact" and whole_batches(book)
        assert len(book.records) in (0, expected)  # never part of the batch
        outcome = "interrupted" if book.notes else "whole" if book.records else "none"
        outcomes[outcome] += 1
        if outcome == "interrupted":  # the next run sets the interrupted batch aside and lands whole
            from pricefold.cli import main
            assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(path), "-q"]) == 0
            again = ledger.Ledger(path)
            assert again.notes == [] and len(again.records) == expected and whole_batches(again)
    print(f"accept-unflagged killed 40 times: {outcomes}")
    assert outcomes["interrupted"] > 0


def test_export_gives_an_overriding_models_own_plan_volume(tmp_path, results, capsys):
    from fitcore import ledger
    from pricefold.ledger_cli import identity
    series = next(s for s in json.loads(results.read_text())["series"]
                  if s["plan"] and sum(c["available"] for c in s["candidates"]) > 1)
    other = next(c for c in series["candidates"] if c["available"] and c["name"] != series["chosen"])
    path = tmp_path / "l.jsonl"
    ledger.append(path, [ledger.Entry(series=series["key"], action="override", fingerprint=series["fingerprint"],
                                      results="r", model=other["name"], proposed=series["chosen"], note="promo",
                                      flags=[f["code"] for f in series["flags"]])], identity(None))
    out = tmp_path / "out.csv"
    assert cli("ledger", "export", path, "--results", results, "-o", out, capsys=capsys)[0] == 0
    row = next(r for r in csv.DictReader(out.open()) if r["product"] == series["key"]["product"]
               and r["region"] == series["key"]["region"])
    assert row["status"] == "overridden" and row["model"] == other["name"]
    assert float(row["plan_volume"]) == pytest.approx(other["plan_volume"])
    assert other["plan_volume"] != pytest.approx(series["plan"]["volume"])  # not the proposal's
    for end in ("lo", "hi"):  # its own interval, as the results hold it for every available candidate
        assert float(row[f"plan_{end}"]) == pytest.approx(other[f"plan_{end}"])
        assert other[f"plan_{end}"] != pytest.approx(series["plan"][end])


def test_one_parser_reads_a_head_for_verify_and_for_carry():
    """``SEQ:DIGEST`` as ``Ledger.head_text`` writes it (a number, a colon, 64 lower-case hex digits)."""
    from pricefold.ledger_cli import parse_head
    digest = "0123456789abcdef" * 4
    assert parse_head(f"12:{digest}") == (12, digest)
    for wrong in (f"12:{digest.upper()}", f"12:{digest[:-1]}", f"²:{digest}", f" 12:{digest}", f"12{digest}", ""):
        assert parse_head(wrong) is None, wrong


def test_a_torn_last_line_is_said_by_verifys_status_and_in_one_line_by_every_command_reading_past_it(
        tmp_path, results, capsys):
    """A revoke cut short by a crash: the chain is intact and the revoke does not count (the accept it withdrew
    stands again), as documented — but ``verify`` exits 3, not 0, and export and accept-unflagged each say in
    one line on stderr which line was ignored and how many bytes it held.  Nothing repairs the file (an append
    that records something sets the torn line aside, as it always did: ``tests/fitcore/test_ledger.py``)."""
    from fitcore import ledger
    from pricefold.ledger_cli import identity
    ledger_path = tmp_path / "l.jsonl"
    assert cli("ledger", "accept-unflagged", results, "--ledger", ledger_path, "-q", capsys=capsys)[0] == 0
    book = ledger.Ledger(ledger_path)
    accepted = book.records[0]
    book.append([ledger.Entry(series=accepted["series"], action="revoke", fingerprint=accepted["fingerprint"],
                              results="r", supersedes=accepted["digest"])], identity(None))
    whole = ledger_path.read_bytes()
    torn = whole.splitlines(keepends=True)[-1][:-40]
    ledger_path.write_bytes(whole[:len(whole) - 40])
    line = len(book.records)
    said = f"l.jsonl: line {line}: torn last line ({len(torn)} bytes, an interrupted write) ignored"
    code, out, _ = cli("ledger", "verify", ledger_path, capsys=capsys)
    assert code == 3 and f"intact, {line - 1} records" in out and said in out
    code, _, err = cli("ledger", "export", ledger_path, "--results", results, "-o", tmp_path / "e.csv", "-q",
                       capsys=capsys)
    assert code == 0 and [e for e in err.splitlines() if "torn" in e] == [f"{ledger_path.parent / said}: what it was "
                                                                          "recording does not count; the next append "
                                                                          "moves it to a side file"]
    assert ledger_path.read_bytes() == whole[:len(whole) - 40]  # read, never repaired
    code, _, err = cli("ledger", "accept-unflagged", results, "--ledger", ledger_path, "-q", capsys=capsys)
    assert code == 0 and len([e for e in err.splitlines() if said in e]) == 1
    assert ledger_path.read_bytes() == whole[:len(whole) - 40]  # nothing to accept: nothing appended or moved


@pytest.mark.parametrize("command", [("show", "{results}", "--ledger", "{ledger}"), ("ledger", "show", "{ledger}")])
def test_reading_a_results_file_as_the_ledger_is_refused_in_one_line(command, results):
    """`show --ledger r.json` listed every series as pending beside a line-1 problem, exit 0: a file with not one
    record is no ledger of decisions, whichever command reads it (as `verify` says)."""
    before = results.read_bytes()
    done = run_cli(*(part.format(results=results, ledger=results) for part in command))
    assert done.returncode == 2 and done.stdout == "" and done.stderr.count("\n") == 1
    assert f"{results.name}: not a ledger: no line of it is a ledger record" in done.stderr
    assert results.read_bytes() == before


@pytest.mark.parametrize("command", [
    ("fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "-o", "{out}.json",
     "--ledger", "{ledger}"),
    ("fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "-o", "{out}",
     "--ledger", "{ledger}", "--engine", "dask"),
    ("triage", "{copy}", "--ledger", "{ledger}")])  # the results as their own ledger: "is also an input" (hostile/)
def test_fit_and_triage_refuse_a_results_file_as_the_ledger_as_every_command_does(command, results, tmp_path):
    """`fit --ledger r.json` said "the chain is broken" and `triage` opened read-only on "the ledger is broken": the
    one line every other command gives, exit 2, the file left as it was and nothing written."""
    copy = tmp_path / "copy.json"
    copy.write_bytes(results.read_bytes())
    before = results.read_bytes()
    done = run_cli(*(part.format(results=results, ledger=results, copy=copy, out=tmp_path / "out") for part in command))
    assert done.returncode == 2 and done.stdout == "" and done.stderr.count("\n") == 1, done.stderr
    assert done.stderr.endswith(f"{results}: not a ledger: no line of it is a ledger record (a ledger holds one JSON "
                                "record a line; a results, data or plan file given in its place?); nothing was done\n")
    assert results.read_bytes() == before and sorted(p.name for p in tmp_path.iterdir()) == ["copy.json"]


def test_show_says_which_decision_a_revoke_withdrew(tmp_path):
    """`bo revoke dovra juice` left the reader to find what was withdrawn: the line names the record, its action
    and model (the replay's rule: one's own latest standing decision on the series)."""
    from fitcore import ledger as fledger
    from tests.fitcore.ledger_support import ANA, BO, after, entry
    path = tmp_path / "l.jsonl"
    fledger.append(path, [entry("a", model="poly2")], BO)
    fledger.append(path, [entry("a", "hold", model=None, supersedes=after(fledger.Ledger(path), "a"))], ANA)
    fledger.append(path, [entry("a", "revoke", model=None, supersedes=after(fledger.Ledger(path), "a"))], BO)
    shown = run_cli("ledger", "show", str(path)).stdout.splitlines()
    assert len(shown) == 3 and " revoke   #1 (accept poly2) " in shown[2]


def test_an_export_edited_in_place_is_not_written_over(tmp_path, results):
    """Before: a note typed into an export's cell (``sed -i``, as an editor saves) was lost to the next export, exit 0."""
    ledger_path = tmp_path / "decisions.jsonl"
    run_cli("ledger", "accept-unflagged", str(results), "--ledger", str(ledger_path), "--analyst", "ana")
    out = tmp_path / "decisions.csv"
    for _ in range(2):  # its own: replaced
        done = run_cli("ledger", "export", str(ledger_path), "--results", str(results), "-o", str(out))
        assert done.returncode == 0, done.stderr
    edited = out.read_text().replace(",ana,", ",ana (checked by lead),", 1)
    out.unlink()
    out.write_text(edited)
    done = run_cli("ledger", "export", str(ledger_path), "--results", str(results), "-o", str(out))
    assert done.returncode == 2 and "not a pricefold export unchanged since written" in done.stderr
    assert out.read_text() == edited
