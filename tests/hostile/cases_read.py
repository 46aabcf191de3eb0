"""The corpus's rows on damaged results read back by ``show``, the ledger commands and ``triage``."""
from __future__ import annotations

from .case import RL, Case, D, R

READ_CASES = [
    # -- damaged results read back ------------------------------------------------------------------------
    *[Case(f"show-{how.replace('_', '-')}", "show r.json", {"d.csv": "good", "r.json": f"damaged:{how}"}, 2, says)
      for how, says in [("series_not_list", "'series'"), ("series_missing", "'series'"), ("no_flags", "'flags'"),
                        ("no_chosen", "'chosen'"), ("key_string", "'key'"), ("flag_no_severity", "'severity'"),
                        ("flags_not_list", "'flags'"), ("candidates_not_list", "'candidates'"),
                        ("candidate_no_name", "'name'"), ("score_text", "'score'"), ("n_text", "'n'"),
                        ("chosen_unknown", "'chosen'"), ("no_settings", "'settings'"), ("no_input", "'input'"),
                        ("schema_other", "schema"), ("series_item_text", "series 1"),
                        ("no_fingerprint", "'fingerprint'"), ("plan_text", "'plan'"),
                        ("price_range_short", "'price_range'"), ("key_value_number", "'key'"),
                        ("coef_text", "'coef'")]],
    *[Case(f"show-parquet-{how.replace('_', '-')}", "show r.parquet",
           {"d.csv": "good", "r.parquet": f"pdamaged:{how}"}, 2, says)
      for how, says in [("no_flags", "'flags'"), ("no_key_columns", "key_columns"),
                        ("key_column_missing", "'product'"), ("no_metadata", "schema"),
                        ("metadata_not_json", "r.parquet"), ("flags_not_json", "'flags'"),
                        ("no_candidate", "'candidate'"), ("no_window_coef", "'window_coef'"),
                        ("no_sigma2", "'sigma2'"), ("no_df", "'df'"), ("no_cov_unscaled", "'cov_unscaled'"),
                        ("no_last_date", "'last_date'")]],
    # a file without any of them (an older pricefold's): shown, but nothing to sign with
    Case("accept-unflagged-no-interval-parts", "ledger accept-unflagged r.parquet --ledger L.jsonl",
         {"d.csv": "good", "r.parquet": "pdamaged:no_interval_parts"}, 2, "no interval parts"),
    # results an earlier pricefold wrote with an infinite threshold: refused in a line, not a traceback
    *[Case(f"{command.split()[-1]}-{name.replace('.', '-')}-threshold-inf", f"{command} {name}" + (
        " --ledger L.jsonl" if command.endswith("accept-unflagged") else ""), {"d.csv": "good", name: f"{how}:threshold_inf"},
        2, f"{name}: its recorded threshold cook_floor is out of range: expected a finite number above 0, got inf")
      for command in ("show", "ledger accept-unflagged") for name, how in (("r.json", "damaged"),
                                                                          ("r.parquet", "pdamaged"))],
    # a series keyed by other columns than the file's: signed as another series, exported shifted by a column
    *[Case(f"{label}-{how.replace('_', '-')}", command, RL | {"b.json": f"damaged:{how}"}, 2,
           f"b.json: series {place}: its key has {problem} (the series are keyed by product)")
      for label, command in (("show", "show b.json"), ("accept", "ledger accept-unflagged b.json --ledger L.jsonl"),
                             ("export", "ledger export L.jsonl --results b.json -o out.csv"))
      for how, place, problem in (("key_column_missing", "1 (region=North)", "no 'product' column"),
                                  ("key_column_extra", "2 (product=item 1, region=North)",
                                   "the extra column 'region'"))],
    *[Case(f"{label}-seed-beyond-64-bits", command, RL | {"b.json": "damaged:seed_beyond_64_bits"}, 2,
           "b.json: the recorded setting seed should be a whole number from 0 to 18446744073709551615")
      for label, command in (("show", "show b.json"), ("accept", "ledger accept-unflagged b.json --ledger L.jsonl"))],
    Case("show-folder-named-json", "show x.json", {"x.json": "dir"}, 2, "is a folder"),
    Case("show-list-document", "show r.json", {"r.json": "results_text_list"}, 2, "schema"),
    Case("show-truncated-json", "show r.json", {"r.json": "results_truncated"}, 2, "r.json"),
    Case("show-empty-json", "show r.json", {"r.json": "empty"}, 2, "r.json"),
    Case("show-binary-json", "show r.json", {"r.json": "garbage"}, 2, "r.json"),
    Case("show-data-as-results", "show d.parquet", {"d.parquet": "parquet:good"}, 2,
         "d.parquet: this is not a results file (a data file?): no 'pricefold-results/1' schema in it"),
    Case("show-csv-as-results", "show d.csv", D, 2, "expected a results file"),
    Case("show-missing", "show r.json", {}, 2, "file not found"),
    Case("show-fifo", "show r.json", {"r.json": "fifo"}, 2, "not a regular file", how="subprocess"),
    Case("show-folder-without-parts", "show out", {"out/_summary.json": "notes_json"}, 2, "part"),
    Case("show-folder-bad-part", "show out",
         {"out/_summary.json": "notes_json", "out/part-00000.parquet": "garbage"}, 2, "part-00000.parquet"),
    Case("show-key-without-equals", "show r.json --key region", R, 2, "COL=VALUE"),
    Case("show-fine", "show r.json --product 'item 0'", R, 0, None),
    Case("export-damaged-no-flags", "ledger export L.jsonl --results b.json -o out.csv",
         RL | {"b.json": "damaged:no_flags"}, 2, "'flags'"),
    Case("export-damaged-series", "ledger export L.jsonl --results b.json -o out.csv",
         RL | {"b.json": "damaged:series_not_list"}, 2, "'series'"),
    Case("export-damaged-parquet", "ledger export L.jsonl --results b.parquet -o out.csv",
         RL | {"b.parquet": "pdamaged:no_key_columns"}, 2, "key_columns"),
    Case("export-results-are-data", "ledger export L.jsonl --results d.csv -o out.csv", RL, 2,
         "expected a results file"),
    Case("accept-damaged-no-chosen", "ledger accept-unflagged b.json --ledger L.jsonl",
         RL | {"b.json": "damaged:no_chosen"}, 2, "'chosen'"),
    Case("accept-damaged-key", "ledger accept-unflagged b.json --ledger L.jsonl",
         RL | {"b.json": "damaged:key_string"}, 2, "'key'"),
    Case("triage-damaged-results", "triage b.json", {"d.csv": "good", "b.json": "damaged:no_settings"}, 2,
         "'settings'"),
    Case("triage-damaged-parquet", "triage b.parquet", {"d.csv": "good", "b.parquet": "pdamaged:no_key_columns"}, 2,
         "key_columns"),
]
