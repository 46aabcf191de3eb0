"""``pricefold ledger …``: verify, show, export and bulk-accept sign-offs.

Every command reads the ledger through ``fitcore.ledger.Ledger``, which verifies the chain as it
reads.  ``export`` and ``accept-unflagged`` refuse a broken chain; ``show`` prints it after a
warning; an interrupted tail (torn line, incomplete batch) is said once, never a refusal.
"""
from __future__ import annotations

import getpass
import os
import re
import socket
import sys
from pathlib import Path

from fitcore import ledger
from fitcore.ledger.missing import RENAMED as MISSING_TAIL
from fitcore.ledger.replay import apply, own_standing, series_id
from fitcore.text import EitherForm, clean

from .ledger_options import KEY_VARIABLE
from .show import key_texts

HEAD = re.compile(r"(\d+):([0-9a-f]{64})")


def parse_head(text: str) -> tuple[int, str] | None:
    """``(seq, digest)`` of a ledger head written as ``SEQ:DIGEST`` (``Ledger.head_text``); None when it is not one."""
    match = HEAD.fullmatch(text)
    return (int(match[1]), match[2]) if match else None


def ledger_key() -> bytes | None:
    value = os.environ.get(KEY_VARIABLE)
    return value.encode("utf-8") if value else None


def identity(analyst: str | None) -> ledger.Identity:
    try:
        import pwd
        os_user = pwd.getpwuid(os.getuid()).pw_name
    except (ImportError, KeyError):
        os_user = getpass.getuser()
    return ledger.Identity(analyst=analyst or os_user, os_user=os_user, host=socket.gethostname())


def record(book: ledger.Ledger, entries, who: ledger.Identity) -> list[dict]:
    """``book.append``, for a command: a signal recorded meanwhile (``interrupts``: while another thread ran) stops
    it before anything is written, and one that comes once the write has begun is acted on when the records are
    whole and synced, the command's last line saying so (``recorded_words``) — never "nothing was written" over
    records that are in."""
    from . import interrupts
    interrupts.check()
    written = book.append(entries, who, before=interrupts.check,
                          recorded=lambda written: interrupts.recorded(recorded_words(book.path, written)))
    if book.tail_moved_to is not None:  # said where it went: "the next append moves it to a side file" said only that
        from fitcore.ledger.files import tail_moved_words
        print(f"pricefold ledger: {book.path}: note: {tail_moved_words(book.tail_moved_to)}", file=sys.stderr)
    return written


def recorded_words(path: Path, records: list[dict]) -> str:
    """'139 records in L.jsonl in full (#156–#294)': what an append wrote, numbered as ``ledger show`` and
    ``ledger revoke --record``/``--batch`` take them."""
    first, last = records[0]["seq"], records[-1]["seq"]
    numbers = f"#{first}" if first == last else f"#{first}–#{last}"
    return f"{len(records):,} record{'s' * (len(records) != 1)} in {path} in full ({numbers})"


def run(args) -> int:
    from .ledger_export import run_export
    return {"verify": run_verify, "show": run_show, "export": run_export,
            "accept-unflagged": run_accept_unflagged}[args.ledger_command](args)


NOT_A_LEDGER = ("not a ledger: no line of it is a ledger record (a ledger holds one JSON record a line; a results, "
                "data or plan file given in its place?)")


def not_a_ledger(book: ledger.Ledger) -> bool:
    """Whether not one line of the file reads as a record (a JSON results file is one line, without a line end)."""
    problems = book.problems or ([book.problem] if book.problem else [])
    return bool(problems) and problems[0].line == 1 and not any("digest" in record for record in book.records)


def refuse_not_a_ledger(path: Path) -> None:
    """``NOT_A_LEDGER`` in one line for a file of which not one line is a record, before a screen opens it.  The
    whole file is read only when its first line is not a record (a ledger's first line is: one line read)."""
    import json
    try:
        if not path.is_file():  # none yet (the screen starts it), or not a file: the reader says what it is
            return
        with open(path, "rb") as handle:
            first = handle.readline(1 << 20)
    except OSError:
        return
    try:
        said = json.loads(first) if first.strip() else {"digest": None}
    except (ValueError, RecursionError):
        said = None
    if isinstance(said, dict) and "digest" in said:
        return
    if not_a_ledger(ledger.Ledger(path, ledger_key())):
        raise ledger.LedgerError(f"{path}: {NOT_A_LEDGER}; nothing was done")


def open_ledger(path: Path, *, refuse: tuple[str, ...] = (), must_exist: bool = False) -> ledger.Ledger:
    """The ledger, read and verified.  A state in ``refuse`` (``broken``, ``unverifiable``) is an
    error (exit 2, one line); otherwise a warning line on stderr first.  Interrupted tails are said
    on stderr.  ``must_exist``: a command that only reads it (a mistyped name must not read as "no
    decisions yet")."""
    book = ledger.Ledger(path, ledger_key())
    if must_exist and not book.exists:
        raise ledger.LedgerError(f"{path}: no such ledger (a command that only reads one needs it to exist)")
    if not_a_ledger(book):
        raise ledger.LedgerError(f"{path}: {NOT_A_LEDGER}; nothing was done")
    if book.state in refuse:
        why = ("the chain is broken" if book.state == ledger.BROKEN else
               f"it cannot be verified without {KEY_VARIABLE}")
        raise ledger.LedgerError(f"{path}: {book.problem}; {why}, so nothing was done "
                                 "(see 'pricefold ledger verify')")
    if book.state == ledger.BROKEN:
        print(f"{path}: warning: the chain is broken at {book.problem}; shown as written, not verified",
              file=sys.stderr)
    elif book.state == ledger.UNVERIFIABLE:
        print(f"{path}: warning: keyed records and no {KEY_VARIABLE}: read unverified, and nothing can be "
              "recorded", file=sys.stderr)
    for note in book.notes:
        print(f"{path}: {note}", file=sys.stderr)
    return book


def key_mismatch(header: dict, book: ledger.Ledger, ledger_path: Path) -> str | None:
    """Why a results file (its ``header``) and the ledger ``book`` share no series — their key columns differ
    (``fitcore.ledger.key_columns.mismatch``, the one check every command where results meet a ledger asks) —
    in one clause; None when they match or the ledger is empty."""
    from fitcore.ledger.key_columns import mismatch, results_columns
    return mismatch(results_columns(header), (h.latest["series"] for h in book.histories.values()), str(ledger_path))


def none_of_ledger(results_keys, book: ledger.Ledger, ledger_path: Path) -> str | None:
    """Why results keyed by the ledger's columns (their series' ``results_keys``) share not one series with
    ``book``, a non-empty ledger (``fitcore.ledger.key_columns.none_of_keys``), in one clause; else None."""
    from fitcore.ledger.key_columns import none_of_keys
    return none_of_keys(results_keys, book.histories, str(ledger_path))


def meets(results_keys: list[dict], book: ledger.Ledger, ledger_path: Path, what: str = "series"):
    """``(said, respelled)`` where results keyed by the ledger's columns (their series' ``results_keys``) meet
    ``book``: one clause saying that none of its series is in them (``none_of_ledger``) and that some of theirs look
    like its own under another spelling (``fitcore.ledger.respelling``; ``what``: what its series are), None when
    neither holds; and the ``Respelled`` found (indices into ``results_keys``)."""
    from fitcore.ledger.respelling import respellings
    found = respellings(results_keys, [h.latest["series"] for h in book.histories.values()])
    said = [none_of_ledger(results_keys, book, ledger_path), found.said(str(ledger_path), what)]
    return "; ".join(part for part in said if part) or None, found


def say_unchecked(prog: str, results: Path, count: int) -> None:
    """Warn of ``count`` series standing on another model than the proposal whose curve neither the results nor
    the decision hold (``candidate_checks.standing_codes``' unchecked): their flags cannot say rising or
    below-zero.  ``export`` and ``show --ledger`` say it alike."""
    if count:
        print(f"{prog}: {results}: warning: {count:,} series stand on another model than the proposal whose curve "
              "neither these results (written by an older pricefold?) nor the decision hold: their flags cannot "
              "say rising or below-zero", file=sys.stderr)


def say_missing(prog: str, results: Path | None, results_keys: list[dict], book: ledger.Ledger, ledger_path: Path,
                within=None):
    """A note on stderr where signed series of ``book`` keyed by the results' columns are not among
    ``results_keys`` (every series of the results: ``fitcore.ledger.missing``; ``within``: only the ledger's
    series a filter on the results keeps are counted; ``results``: the file it is about, None for the fit's own),
    those the results hold under another spelling said as such (``Missing.beside``).  Never a refusal: a team
    ledger may hold other product ranges, and results may be a subset.  Returns the ``Missing``."""
    from fitcore.ledger.missing import NONE, missing_from
    if not book.histories:
        return NONE
    gone = missing_from(results_keys, book.histories, within).beside(results_keys)
    said = gone.said(str(ledger_path))
    if said:
        print(f"{prog}: {f'{results}: ' if results else ''}note: {said}; {MISSING_TAIL}", file=sys.stderr)
    return gone


def refuse_key_mismatch(results: Path, header: dict, book: ledger.Ledger, ledger_path: Path) -> None:
    """``key_mismatch`` as a refusal (exit 2, one line), for the commands that write to the ledger or from it."""
    said = key_mismatch(header, book, ledger_path)
    if said:
        raise ledger.LedgerError(f"{results}: {said}; nothing was written")


def run_verify(args) -> int:
    witness = None
    if args.head is not None:
        witness = parse_head(args.head.strip())
        if witness is None:
            raise ledger.LedgerError(f"expected --head as SEQ:DIGEST (a number, a colon, 64 hex digits), "
                                     f"got {clean(args.head)!r}")
    book = ledger.Ledger(args.ledger, ledger_key())
    if not book.exists:
        raise ledger.LedgerError(f"{args.ledger}: file not found")
    status, lines = verdict(book, witness, str(args.ledger))
    try:  # the status stands even when the reader goes away early (``| head -1``)
        print("\n".join(lines))
        sys.stdout.flush()
    except BrokenPipeError:
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
    return status


# ``verify``'s exit status for an intact chain ending in an interrupted write (a torn last line, an incomplete
# batch): not broken, but a decision being recorded there does not count, which a script should hear.
INTERRUPTED = 3

# A record deleted or moved breaks every link after it: past this many, the rest are counted, not listed.
SHOWN_PROBLEMS = 20


def verdict(book: ledger.Ledger, witness: tuple[int, str] | None, name: str) -> tuple[int, list[str]]:
    """Exit status and lines of ``ledger verify``, each led by the ledger's ``name`` but the head's."""
    problems = book.problems or ([book.problem] if book.problem else [])
    if not_a_ledger(book):
        return 1, [f"{name}: {NOT_A_LEDGER}"]
    if problems:
        said = [str(problem) for problem in problems[:SHOWN_PROBLEMS]]
        if len(problems) > SHOWN_PROBLEMS:
            said.append(f"… and {len(problems) - SHOWN_PROBLEMS:,} more problems after line "
                        f"{problems[SHOWN_PROBLEMS - 1].line} (the first ones explain the rest)")
        if ledger_key() and problems[0].line == 1 and all("its digest does not match" in p.message for p in problems):
            said.insert(0, "no record's digest matches with the key in PRICEFOLD_LEDGER_KEY: "
                           "most likely the wrong key (or every record was edited)")
        return 1, [f"{name}: {line}" for line in said]
    kind = "keyed (HMAC-SHA-256)" if ledger_key() else "SHA-256"
    lines = [f"{name}: intact, {len(book.records)} records, {kind} chain", *(f"{name}: {n}" for n in book.notes),
             f"head {book.head_text}"]
    interrupted = INTERRUPTED if book.notes else 0  # intact, but what an interrupted write left is not counted
    if witness is None:
        return interrupted, lines
    seq, digest = witness
    if book.holds(seq, digest):
        return interrupted, lines + [f"{name}: still holds the witnessed record {seq}:{digest[:12]}…"]
    last = book.head[0]
    why = (f"it ends at seq {last}: records were removed from the end" if seq > last else
           f"seq {seq} is now a different record ({book.records[seq - 1]['digest'][:12]}…)")
    return 1, lines + [f"{name}: does not hold the witnessed record {seq}:{digest[:12]}…; {why}"]


def product_column(given: str | None) -> str:
    """The key column naming the product: a record's ``series`` holds its key columns sorted by name, so the
    first is not the product where a segment sorts before it (``family``, ``note``); ``--product-column``, else
    ``[columns] product`` of the settings file, else ``product``, as ``fit`` names it."""
    if given:
        return given
    from fitcore.data.config import load_config

    from .options import settings_file_keys
    return str(load_config(None, settings_file_keys()).get("columns", {}).get("product") or "product")


def product_first(key: dict, product: str) -> dict:
    """A series key with its product column first, the rest as recorded (as results and the screen show it)."""
    return {product: key[product], **key} if product in key else key


def run_show(args) -> int:
    book = open_ledger(args.ledger, must_exist=True)
    product = product_column(args.product_column)
    from fitcore.ledger.key_columns import key_sets
    # a filter that could match nothing, or a column named that no series has (it orders each key too): say why
    keys = [h.latest["series"] for h in book.histories.values()] if args.product or args.product_column else []
    if keys and not any(product in key for key in keys):
        sets = " or ".join(", ".join(map(clean, sorted(names))) for names in key_sets(keys))
        where = "" if args.product_column or product == "product" else \
            " — the settings file's [columns] product, in the current folder"  # a name the user never typed here
        raise ledger.LedgerError(f"{args.ledger}: no series has a product column {clean(product)!r}{where} (the key "
                                 f"columns: {sets}); name it with --product-column")
    several = len(key_sets(h.latest["series"] for h in book.histories.values())) > 1  # name the columns then
    seqs = {r["digest"]: r["seq"] for r in book.records if r["action"] in ("accept", "override")}
    named = product if several else None
    texts = key_texts([product_first(r["series"], product) for r in book.records], named=named)  # told apart
    wanted = EitherForm(args.product or ())  # either normal form, or as shown, as the screen's search
    histories = {}  # replayed as listed: a revoke names the decision it withdrew
    listed = 0
    for r, text in zip(book.records, texts):
        withdrawn = (own_standing(histories.get(series_id(r["series"])), r["analyst"], r.get("os_user"))
                     if r["action"] == "revoke" else None)
        apply(histories, [r])
        value = r["series"].get(product)
        if args.product and value not in wanted:
            continue
        model = clean(r.get("model") or "")
        if r["action"] == "override":
            model = f"{model} instead of {clean(r.get('proposed') or '')}"
        elif r["action"] == "carry":
            model = f"{model} from #{seqs.get(r.get('carries'), '?')}"
        elif withdrawn is not None:
            model = f"#{withdrawn['seq']} ({withdrawn['action']} {clean(withdrawn.get('model') or '')})".replace(" )", ")")
        who = clean(r["analyst"])
        if r.get("os_user") and r["os_user"] != r["analyst"]:
            who = f"{who} ({clean(r['os_user'])})"
        note = f" — {clean(r['note'])}" if r.get("note") else ""
        print(f"#{r['seq']:<5} {clean(r['at'])}  {who:<12} {r['action']:<8} {model:<22} "
              f"{text}{note}")
        listed += 1
    if args.product:  # as show says it: a near miss (a space at an end, a case) named
        from .show import also_alike, near_miss
        products = [key[product] for key in keys if product in key]
        if not listed:
            print(f"pricefold ledger: no series in {args.ledger} matches{near_miss(args.product, products)}",
                  file=sys.stderr)
            return 1
        note = also_alike(args.product, products, str(args.ledger))
        if note:
            print(f"pricefold ledger: {note}", file=sys.stderr)
    return 0


def run_accept_unflagged(args) -> int:
    from fitcore.ledger.elsewhere import fitted_ledger
    from fitcore.ledger.proposals import unflagged
    if args.ledger is None:  # no default: the ledger the results were fitted against named as the way on
        from .ledger_choice import required_for
        raise required_for(args.results, fitted_ledger(results_header(args.results)))
    # What the results propose and the models as they stand, read before taking the lock (a results
    # folder can be large).
    header, proposals = unflagged(args.results, args.ledger)  # another ledger's 'shifted' flags not counted
    fitted = fitted_ledger(header)
    if fitted and Path(fitted).exists() and not args.ledger.exists():  # a mistyped --ledger: no new ledger
        raise ledger.LedgerError(f"{args.ledger}: no such ledger, and {args.results} was fitted against {fitted}; "
                                 "check --ledger (nothing was written)")
    digest = ledger.results_digest(header)
    book = open_ledger(args.ledger, refuse=(ledger.BROKEN, ledger.UNVERIFIABLE))
    if book.exists:  # one it may not write (a read-only mount) said first, not after "accepted as new series"
        from fitcore.ledger.files import open_ledger as open_file
        os.close(open_file(args.ledger, write=True))
    refuse_key_mismatch(args.results, header, book, args.ledger)
    from fitcore.ledger.elsewhere import backtested_elsewhere, head_gone
    gone = head_gone(args.results, header, book.records, args.ledger)
    if gone:  # as carry: its flags were judged against decisions that are no longer there (an older copy put back)
        raise ledger.LedgerError(f"{gone}; nothing was accepted")
    foreign = backtested_elsewhere(args.results, header, args.ledger)
    if foreign:  # as show --ledger and the triage screen say it
        print(f"pricefold ledger: {foreign}; its 'shifted' flags are not counted (fit again with --ledger on "
              "this ledger)", file=sys.stderr)
    keys = ResultsKeys(args.results)  # read once, where the ledger holds series: checked again under the lock
    checked = (len(book.records), new_set(args, keys, book, warn=True))  # said (or refused) before anything is written
    if book.histories:  # a renamed product's signed spelling gone: said before its new name is accepted as new
        say_missing("pricefold ledger", args.results, keys.keys, book, args.ledger)
    counted: dict[str, int] = {}

    def decide(records):  # under the lock: book.histories is what the ledger holds now
        refuse_key_mismatch(args.results, header, book, args.ledger)
        found = checked[1] if len(book.records) == checked[0] else new_set(args, keys, book, warn=False)
        alike = {series_id(keys.keys[i]) for i in found.results.tolist()}
        held = bool(book.histories)
        counted.update(new=0, alike=0)
        for key, fingerprint, chosen, snapshot in proposals:
            history = book.histories.get(series_id(key))
            if history is not None and history.current is not None:
                continue
            if history is None and held:  # new to a ledger holding series: a new product, or a respelling
                counted["alike" if series_id(key) in alike else "new"] += 1
            latest = history.latest if history is not None else None
            yield ledger.Entry(series=key, action="accept", fingerprint=fingerprint, results=digest, model=chosen,
                               proposed=chosen, note=args.note, supersedes=latest["digest"] if latest else None,
                               flags=(), signed=snapshot)

    if not proposals and not args.ledger.exists():  # none is started (an empty file would read as one begun)
        folder = args.ledger.parent
        if not folder.is_dir() or not os.access(folder, os.W_OK | os.X_OK):  # as the append would have found
            raise ledger.LedgerError(f"{args.ledger}: cannot start a ledger there ({folder} is not a folder this "
                                     "user may write in); nothing was written")
        if not args.quiet:
            print(f"accepted 0 unflagged series: every series carries a flag or has no model, so no ledger was "
                  f"started at {args.ledger}", file=sys.stderr)
        return 0
    written = record(book, decide, identity(args.analyst))
    if not args.quiet:
        print(f"accepted {len(written):,} unflagged series without a decision → {args.ledger}"
              + new_words(counted.get("new", 0), counted.get("alike", 0)), file=sys.stderr)
        print(f"ledger head {book.head_text}", file=sys.stderr)
    return 0


def results_header(path: Path) -> dict:
    """The header of a results file or folder: a Parquet one's metadata alone, a JSON file read whole."""
    from fitcore.data.columns import is_parquet_name
    from fitcore.results.read import read_header, read_results, result_parts
    return read_header(path) if result_parts(path) is not None or is_parquet_name(path) else read_results(path)[0]


def new_words(new: int, alike: int) -> str:
    """What ``accept-unflagged``'s summary adds of the series it accepted new to a ledger that held series: those
    spelled like none of its own (a new product is normal in a later cycle), and those that look like its own
    under another spelling (accepted as new series: ``--new-series``)."""
    said = []
    if new:
        said.append(f"{new:,} of them new to the ledger, spelled like none of its series")
    if alike:
        said.append(f"{alike:,} spelled like its own otherwise, accepted as new series ({NEW_SERIES})")
    return "".join(f"; {part}" for part in said)


NEW_SERIES = "--new-series"


class ResultsKeys:
    """The results' series keys, read when first asked (``keys``): a bulk accept into an empty ledger needs none."""

    def __init__(self, path: Path) -> None:
        self.path, self._keys = path, None

    @property
    def keys(self) -> list[dict]:
        if self._keys is None:
            from fitcore.results.series_columns import results_keys
            self._keys = list(results_keys(self.path))
        return self._keys


def new_set(args, keys: ResultsKeys, book: ledger.Ledger, warn: bool):
    """The ``Respelled`` of the results' series (``keys``) against the ledger ``book`` (``meets``), where the
    results may go in: a bulk accept into a non-empty ledger holding none of them would start a second set of
    series beside its own, and one of series that look like its own under another spelling (``north`` for
    ``North``) would sign them beside those, leaving their decisions behind.  Refused (exit 2) unless
    ``--new-series`` says the new series are meant; then one warning line (``warn``: say it; else only check)."""
    from fitcore.ledger.respelling import NONE
    if not book.histories:  # an empty ledger takes any series
        return NONE
    said, found = meets(keys.keys, book, args.ledger)
    if said is None:
        return found
    kept = decisions_left_behind(found, book)
    if not args.new_series:
        raise ledger.LedgerError(f"{args.results}: {said}{kept}; nothing was written (new series all the same? then "
                                 f"add {NEW_SERIES})")
    if warn:
        print(f"pricefold ledger: {args.results}: warning: {said}; accepted as new series ({NEW_SERIES}){kept}",
              file=sys.stderr)
    return found


def decisions_left_behind(found, book: ledger.Ledger) -> str:
    """'; the ledger's series they look like keep 3 decisions under their own spelling, which these results do
    not carry on (1 override, 2 accepts; e.g. the override of drunim crisps · North: loglog by ana (root))' —
    what a bulk accept of respelled series as new ones leaves behind (a trial: an override lost without a
    word); empty where the look-alikes stand undecided."""
    from collections import Counter

    from fitcore.ledger.rules import label, person
    histories = list(book.histories.values())
    decided = [histories[i].decision for i in found.ledger.tolist() if histories[i].decision is not None]
    if not decided:
        return ""
    kinds = Counter(record["action"] for record in decided)
    order = [kind for kind in ("override", "accept", "hold") if kinds[kind]]
    first = next(record for record in decided if record["action"] == order[0])
    what = f"{label(first['series'])}: {first.get('model') or 'held'} by {person(first)}"
    if len(decided) == 1:
        return (f"; the ledger's series it looks like keeps its decision under its own spelling, which these "
                f"results do not carry on ({'an' if order[0] != 'hold' else 'a'} {order[0]} of {what})")
    counts = ", ".join(f"{kinds[kind]:,} {kind}{'s' if kinds[kind] > 1 else ''}" for kind in order)
    return (f"; the ledger's series they look like keep {len(decided):,} decisions under their own spelling, which "
            f"these results do not carry on ({counts}; e.g. the {order[0]} of {what})")
