"""Recipes: TOML column lists validated against the registry (sheetvol.fill.recipe)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from sheetvol.fill.recipe import (
    DEFAULT_RECIPE,
    RecipeError,
    default_specs,
    load_recipe,
    make_spec,
    parse_recipe,
)


def test_default_set_is_the_documented_one():
    got = [(s.function, s.header) for s in default_specs()]
    assert got == [
        ("SV_DEVIATION", "Std dev 14 (simple, close)"),
        ("SV_ATR", "ATR 14 (Wilder)"),
        ("SV_BAND", "Upper band 20x2"),
        ("SV_BAND", "Lower band 20x2"),
        ("SV_PCTB", "%b 20x2"),
        ("SV_CLOSEVOL", "Close vol 20 (ann.)"),
    ]
    assert len(DEFAULT_RECIPE) == 6
    dev = default_specs()[0]
    assert dict(dev.options) == {
        "period": 14, "average": "simple", "divisor": "population", "seed": "average"
    }
    assert dict(dev.inputs) == {"prices": "close"}
    assert dict(default_specs()[1].inputs) == {"high": "high", "low": "low", "close": "close"}


def test_toml_file_round_trip(tmp_path):
    path = tmp_path / "cols.toml"
    path.write_text(
        """
[[column]]
function = "sv_deviation"
options = { period = 20, average = "exponential", divisor = "sample" }

[[column]]
function = "SV_ATR"
id = "atr"
header = "ATR ten"
options = { period = 10, smoothing = "simple" }

[[column]]
function = "SV_VOLRANK"
inputs = { values = "atr" }
options = { lookback = 50 }

[[column]]
function = "SV_AVERAGE"
inputs = { prices = "HIGH" }
options = { kind = "wilder", period = 5 }
""",
        encoding="utf-8",
    )
    specs = load_recipe(path)
    assert [s.function for s in specs] == ["SV_DEVIATION", "SV_ATR", "SV_VOLRANK", "SV_AVERAGE"]
    assert specs[0].header == "Std dev 20 (exponential, close, sample)"
    assert specs[1].header == "ATR ten" and specs[1].id == "atr"
    assert specs[1].options["smoothing"] == "simple"
    assert dict(specs[2].inputs) == {"values": "atr"}
    assert specs[2].header == "Vol rank 50 (atr)"
    assert dict(specs[3].inputs) == {"prices": "high"}
    assert specs[3].header == "Wilder avg 5 [high]"


@pytest.mark.parametrize(
    ("entry", "message"),
    [
        ({"function": "SV_NOPE"}, "no sheetvol function named 'SV_NOPE'"),
        ({"function": "SV_STOP"}, "gives one value, not a column"),
        ({"function": "SV_ATR", "options": {"period": 1.5}},
         "SV_ATR: period must be a whole number from 1 to 5000, got 1.5"),
        ({"function": "SV_ATR", "options": {"length": 3}}, "has no option 'length'"),
        ({"function": "SV_BAND", "options": {"line": "top"}}, 'line must be one of "upper"'),
        ({"function": "SV_ATR", "inputs": {"prices": "close"}}, "has no input 'prices'"),
        ({"function": "SV_VOLRANK"}, "needs input 'values'"),
        ({"function": "SV_VOLRANK", "inputs": {"values": "later"}},
         "neither a price column"),
        ({"function": "SV_ATR", "period": 14}, "unknown key"),
        ({"options": {"period": 3}}, "missing function"),
    ],
)
def test_bad_entries_are_named(entry, message):
    with pytest.raises(RecipeError) as err:
        parse_recipe([entry], source="mine.toml")
    assert "mine.toml, column 1" in str(err.value)
    assert message in str(err.value)


def test_duplicate_headers_and_ids_are_refused():
    with pytest.raises(RecipeError, match="two columns have the header"):
        parse_recipe(["SV_ATR", "SV_ATR"])
    with pytest.raises(RecipeError, match="already used"):
        parse_recipe([{"function": "SV_ATR", "id": "a"},
                      {"function": "SV_ATR", "id": "a", "header": "other"}])


def test_invalid_toml_names_the_file(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text("[[column]\nfunction = 'SV_ATR'\n", encoding="utf-8")
    with pytest.raises(RecipeError, match=r"broken\.toml: not a valid TOML recipe"):
        load_recipe(path)
    with pytest.raises(RecipeError, match="not found"):
        load_recipe(tmp_path / "missing.toml")
    empty = tmp_path / "empty.toml"
    empty.write_text("", encoding="utf-8")
    with pytest.raises(RecipeError, match="no columns"):
        load_recipe(empty)


def test_a_spec_computes_like_its_reference():
    # Reference: pandas rolling std with ddof=0 (population), the simple-average case.
    spec = make_spec("SV_DEVIATION", {"period": 5})
    from sheetvol.frame import compute_columns

    x = np.array([10.0, 11.5, 9.25, 12.0, 13.5, 12.75, 11.0, 14.0])
    got = compute_columns([spec], {"close": x})[0]
    ref = pd.Series(x).rolling(5).std(ddof=0).to_numpy()
    assert np.isnan(got[:4]).all()
    np.testing.assert_allclose(got[4:], ref[4:], rtol=1e-12)


def test_one_trade_settings_class_for_the_recipe_and_the_review():
    # The [trades] table, the flags and the review share one class, whose defaults come
    # from the core (sheetvol.core.levels, sizing and review: stated once there).
    from sheetvol.core import levels, review, sizing
    from sheetvol.fill import recipe as recipe_module
    from sheetvol.fill import review as review_module

    assert recipe_module.TradeSettings is review_module.TradeSettings
    parsed = recipe_module.parse_trades({"instruments": "Contracts", "risk": 0.02})
    assert isinstance(parsed, review_module.TradeSettings)
    assert parsed.contract_sheet == "Contracts" and parsed.risk == 0.02
    plain = review_module.TradeSettings()
    assert (plain.measure, plain.stop_multiple, plain.target_multiple, plain.trail_multiple,
            plain.risk) == (review.MEASURE, levels.STOP_MULTIPLE, levels.TARGET_MULTIPLE,
                            levels.TRAIL_MULTIPLE, sizing.RISK_SHARE)
    assert dict(plain.options) == {"period": review.PERIOD} and math.isnan(plain.equity)
