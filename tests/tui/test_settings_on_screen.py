"""The screen states how its numbers were made, as ``show`` does: the weighting and the values the controls
are held at (evidence and help), the revenue-best price as the fitted curve's, no elasticity where price never
varied, and ``c`` described as the fitted curve's adjustment, not as what a week would have sold."""
from __future__ import annotations

from fitcore.data.columns import Columns
from tests.tui.conftest import make_app, screen_text, started, until
from tui.factory import Source, sample_source
from tui.help import help_text
from tui.widgets.evidence import predicts

from .test_controls_screen import put_on, rendered


async def test_the_evidence_says_the_weighting_and_the_controls_held(ledger_path):
    app = make_app(ledger_path, sample_source(("promo",), season=1))
    async with app.run_test(size=(160, 60)) as pilot:
        await started(app, pilot)
        s = put_on(app, "truffle oil 250 ml · North")
        await pilot.pause()
        evidence = app.screen.evidence
        said = evidence.plan_text(s).plain
        promo = app.session.results.controls.plan[s, 0]
        assert f"Unweighted (every row counts alike); controls held at the plan's values: promo {promo:g}, the season" \
            in said
        assert "Revenue-maximising price of the fitted curve within the observed range" in said
        await until(pilot, lambda: "controls held at the plan's values" in screen_text(app))
        words = rendered(help_text(results=app.session.results))
        assert "Every fit unweighted (every row counts alike)." in words
        assert "Controls held fixed in every curve: promo, the season" in words
        assert "This fit holds promo and the season fixed" in words and "seasons," not in words
        assert "not what that week would have sold" in words and "what each week would have sold" not in words


async def test_a_weighted_fit_says_so_and_a_flat_price_has_no_elasticity(ledger_path, tmp_path):
    import numpy as np
    rng = np.random.default_rng(2)
    rows = ["product,week,price,volume,w"]
    for name, prices in (("steady", np.full(30, 2.5)), ("moving", rng.uniform(1.5, 3.5, 30))):
        for i, price in enumerate(prices):  # invented: volume −200 a unit of price, weights 1–3
            day = np.datetime64("2024-01-01") + np.timedelta64(7 * i, "D")
            rows.append(f"{name},{day},{price:.2f},{1000 - 200 * price + rng.normal(0, 20):.1f},{1 + i % 3}")
    (tmp_path / "weighted.csv").write_text("\n".join(rows) + "\n")
    (tmp_path / "plan.csv").write_text("product,plan_price\nsteady,2.5\nmoving,2.5\n")
    source = Source(data=tmp_path / "weighted.csv", columns=Columns(date="week", weight="w"),
                    plan_file=tmp_path / "plan.csv")
    app = make_app(ledger_path, source)
    async with app.run_test(size=(160, 60)) as pilot:
        await started(app, pilot)
        results = app.session.results
        s = next(i for i in range(results.n_series) if results.price_hi[i] == results.price_lo[i])
        assert ("Weighted by column w (weighted least squares: rows of weight 0 count for nothing; intervals are for "
                "a week weighing as much as its series' average row of positive weight).") \
            in app.screen.evidence.settings_text(s)
        said = predicts(results, s, int(results.chosen[s]), diagnosis=app.session.diagnosis)
        assert said.endswith("elasticity not estimable (price never varied in this series)")
        assert "Every fit weighted by column w" in rendered(help_text(results=results))


async def test_the_title_says_the_rows_of_weight_0_and_the_range_of_the_others(ledger_path, tmp_path):
    """Rows of weight 0 count in n, said beside it, and not in the prices observed (numpy's min and max of the
    rows of positive weight): "44 obs (4 of weight 0), prices 2.00–3.00", not 1.50–3.60."""
    import numpy as np
    rng = np.random.default_rng(5)
    price = np.concatenate([np.round(rng.uniform(2.0, 3.0, 40), 2), [1.5, 3.2, 3.4, 3.6]])
    weight = np.concatenate([np.round(rng.uniform(0.5, 2.0, 40), 2), np.zeros(4)])
    rows = ["product,price,volume,w"] + [f"zeroed,{p},{1000 - 200 * p + rng.normal(0, 10):.1f},{w}"
                                         for p, w in zip(price, weight)]
    (tmp_path / "weighted.csv").write_text("\n".join(rows) + "\n")
    app = make_app(ledger_path, Source(data=tmp_path / "weighted.csv", columns=Columns(weight="w"), plan_price=3.4))
    async with app.run_test(size=(120, 70)) as pilot:
        await started(app, pilot)
        lo, hi = np.min(price[weight > 0]), np.max(price[weight > 0])
        said = f"44 obs (4 of weight 0), prices {lo:.2f}–{hi:.2f}"
        assert said in app.screen.evidence.title_text(0).plain
        await until(pilot, lambda: said in screen_text(app))
        assert "outside-range" in screen_text(app)
        await until(pilot, lambda: "○ weight 0" in screen_text(app))  # the chart's key: drawn apart
