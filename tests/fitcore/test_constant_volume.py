"""A series whose volume never varies has no score (Q² = 1 − SSE/SST with SST = 0 is undefined; numpy's
``var`` of its volumes and statsmodels' ``centered_tss`` of a fit to it are exactly 0).  No score must not
read as a pass: it raises ``weak-fit`` with a sentence of its own, so ``accept-unflagged`` leaves it for a
human, and the column-wise sentences (the Parquet writer's) say what the series' own sentence says."""
from __future__ import annotations

import json

import numpy as np
import statsmodels.api as sm

import fitcore
from fitcore.review import sentences as S
from fitcore.review.flags import CODES, diagnose
from fitcore.review.sentence_columns import flag_sentences
from pricefold.cli import main

WEAK = CODES.index("weak-fit")


def write(path, rng):
    prices = np.round(rng.uniform(1.2, 1.8, 60), 2)
    rows = ["product,price,volume"]
    for name, volume in (("constant huge", np.full(60, 9e14)), ("constant small", np.full(60, 250.0)),
                         ("sloped", 900 - 300 * prices + rng.normal(0, 5, 60))):
        rows += [f"{name},{p},{float(v)!r}" for p, v in zip(prices.tolist(), volume)]
    path.write_text("\n".join(rows) + "\n")
    return prices


def test_a_volume_that_never_varies_raises_weak_fit_with_its_own_sentence(tmp_path):
    prices = write(tmp_path / "d.csv", np.random.default_rng(3))
    data = fitcore.load(tmp_path / "d.csv", fitcore.Columns())
    results = fitcore.fit_batch(data, fitcore.FitSettings())
    diagnosis = diagnose(results)
    names = [data.key_of(s)["product"] for s in range(results.n_series)]
    constant = np.array([n.startswith("constant") for n in names])
    for s, name in enumerate(names):
        volume = data.volume[data.offsets[s]:data.offsets[s + 1]]
        ols = sm.OLS(volume, sm.add_constant(prices)).fit()
        assert (np.var(volume) == 0) == constant[s] and (ols.centered_tss == 0) == constant[s]  # numpy, statsmodels
        assert np.isfinite(results.score[s]) != constant[s] and results.chosen[s] >= 0
    assert diagnosis.raised[constant, WEAK].all() and not diagnosis.raised[~constant, WEAK].any()
    huge = names.index("constant huge")
    assert S.sentence(diagnosis, huge, "weak-fit") == (
        "Q² is undefined: volume never varies across the rows it is judged on (of 60 observations), so no curve can "
        "be told from the average volume and price's effect on volume cannot be estimated from these data.")
    flagged = np.flatnonzero(diagnosis.raised[:, WEAK])
    assert flag_sentences(diagnosis, flagged, "weak-fit").to_pylist() == \
        [S.sentence(diagnosis, s, "weak-fit") for s in flagged.tolist()]


def test_accept_unflagged_leaves_a_constant_volume_for_a_human(tmp_path):
    write(tmp_path / "d.csv", np.random.default_rng(3))
    for out in ("r.json", "r.parquet"):
        assert main(["fit", str(tmp_path / "d.csv"), "-o", str(tmp_path / out), "-q"]) == 0
        book = tmp_path / f"{out}.ledger.jsonl"
        assert main(["ledger", "accept-unflagged", str(tmp_path / out), "--ledger", str(book), "-q"]) == 0
        accepted = [json.loads(line)["series"]["product"] for line in book.read_text().splitlines()]
        assert accepted == ["sloped"]
    # the JSON writer and the Parquet writer (column-wise, after the rows are freed) write the same sentence
    from fitcore.results.read import read_results
    said = [{r["key"]["product"]: [f["message"] for f in r["flags"] if f["code"] == "weak-fit"]
             for r in read_results(tmp_path / out)[1]} for out in ("r.json", "r.parquet")]
    assert said[0] == said[1] and said[0]["constant huge"][0].startswith("Q² is undefined: volume never varies")
