"""The registry is the one description of every worksheet function: check it is coherent."""

from __future__ import annotations

import inspect

import numpy as np
import pytest

from sheetvol import docgen
from sheetvol.functions import registry
from sheetvol.functions.registry import FUNCTIONS, ArgumentError

NAMES = [f.name for f in FUNCTIONS]


def test_names_are_unique_prefixed_and_upper_case():
    all_names = [name for name, _, _ in registry.worksheet_names()]
    assert len(all_names) == len(set(all_names))
    for name in all_names:
        assert name.startswith("SV_") and name == name.upper(), name


@pytest.mark.parametrize("func", FUNCTIONS, ids=NAMES)
def test_parameters_match_the_kernel_signature(func):
    kernel = func.resolve_kernel()
    sig = inspect.signature(kernel)
    kernel_params = sig.parameters
    for p in func.params:
        if p.name == func.select:
            continue
        assert p.name in kernel_params, f"{func.name}: kernel has no parameter {p.name!r}"
        kp = kernel_params[p.name]
        if not p.required and kp.default is not inspect.Parameter.empty:
            # One default, stated once: the registry and the Python API must agree.
            assert kp.default == p.default, f"{func.name}.{p.name}: {kp.default!r} != {p.default!r}"
    names = {p.name for p in func.params}
    for kp in kernel_params.values():
        if kp.default is inspect.Parameter.empty and kp.kind is not kp.VAR_KEYWORD:
            assert kp.name in names, f"{func.name}: required kernel argument {kp.name!r} missing"


@pytest.mark.parametrize("func", FUNCTIONS, ids=NAMES)
def test_help_fits_the_function_dialog(func):
    # xlwings cuts help text at 255 characters; longer text can break registration.
    assert len(func.summary) <= 255
    for p in func.params:
        assert 0 < len(p.help) <= 255, (func.name, p.name)


@pytest.mark.parametrize("func", FUNCTIONS, ids=NAMES)
def test_defaults_are_valid_values(func):
    for p in func.options:
        if not p.required:
            assert func.check(p, p.default) == p.default, (func.name, p.name)
        if p.kind == "choice":
            assert p.default in p.choices


def test_period_message_names_function_argument_and_range():
    with pytest.raises(ArgumentError) as err:
        registry.get("SV_DEVIATION").bind(([1.0, 2.0], 1.5))
    assert str(err.value) == "SV_DEVIATION: period must be a whole number from 2 to 5000, got 1.5"


def test_choice_message_lists_the_choices():
    with pytest.raises(ArgumentError) as err:
        registry.get("SV_AVERAGE").bind(([1.0], 14, "expo"))
    assert 'one of "simple", "linear", "exponential", "wilder"' in str(err.value)


def test_a_number_in_a_word_slot_shows_the_argument_order():
    with pytest.raises(ArgumentError) as err:
        registry.get("SV_BAND").bind(([1.0], 20, 2))
    assert str(err.value) == (
        'SV_BAND: line must be one of "upper", "middle", "lower", got 20 '
        "(argument order: SV_BAND(prices, line, period, width, average, divisor))"
    )


def test_bounds_read_plainly_and_whole_floats_show_as_typed():
    with pytest.raises(ArgumentError) as err:
        registry.get("SV_BAND").bind(([1.0], "upper", 20, 0.0))
    assert str(err.value) == "SV_BAND: width must be a number above 0, up to 100, got 0"
    # Risk is a share of equity: typing 1 for "1 %" must not size the trade at 100 %.
    with pytest.raises(ArgumentError, match=r"risk must be a number above 0, up to 0\.25, got 1$"):
        registry.get("SV_SIZE").bind((100_000.0, 1.0, 100.0, 98.0))


def test_option_text_numbers_follow_the_cell_rules():
    # "1,5" is not 15: the same refusal as for a price cell.
    with pytest.raises(ArgumentError, match="multiple must be"):
        registry.get("SV_STOP").bind((100.0, 1.0, "1,5"))
    assert registry.get("SV_SIZE").bind(("250,000", 0.01, 100.0, 98.0))["equity"] == 250000.0


def test_required_argument_and_too_many_arguments():
    with pytest.raises(ArgumentError, match="SV_ATR: close is required"):
        registry.get("SV_ATR").bind(([1.0], [1.0]))
    with pytest.raises(ArgumentError, match="takes at most 7 arguments, got 8"):
        registry.get("SV_ATR").bind(([1.0], [1.0], [1.0], 14, "wilder", "average", "blank", 3))


def test_options_accept_text_numbers_and_any_case():
    bound = registry.get("SV_AVERAGE").bind(([1.0], "20", "Exponential"))
    assert bound == {"prices": [1.0], "period": 20, "kind": "exponential", "seed": "average"}


def test_blank_options_take_defaults():
    bound = registry.get("SV_BAND").bind(([1.0], None, "", None))
    assert bound["line"] == "upper" and bound["period"] == 20 and bound["width"] == 2.0


def test_variants_are_derived_from_series_functions_only():
    assert registry.variant_of("sv_atr_last")[1] == "last"
    assert registry.variant_of("SV_DEVIATION_ON")[1] == "on"
    with pytest.raises(KeyError):
        registry.variant_of("SV_STOP_ON")  # scalar functions have no column forms
    on = registry.variant_params(registry.get("SV_ATR"), "on")
    assert [p.name for p in on[:2]] == ["date", "dates"]


def test_select_picks_the_named_output():
    x = np.linspace(100.0, 120.0, 40) + np.sin(np.arange(40))
    band = registry.get("SV_BAND")
    upper = band(x, "upper", 20, 2)
    lower = band(x, "lower", 20, 2)
    middle = band(x, "middle", 20, 2)
    # Independent reference: numpy mean and population std of the last 20 values.
    window = x[-20:]
    assert upper[-1] == pytest.approx(window.mean() + 2 * window.std(), rel=1e-12)
    assert lower[-1] == pytest.approx(window.mean() - 2 * window.std(), rel=1e-12)
    assert middle[-1] == pytest.approx(window.mean(), rel=1e-12)


def test_function_reference_is_up_to_date():
    assert docgen.DOC_PATH.read_text(encoding="utf-8") == docgen.render(), (
        "docs/functions.md is stale: run python -m sheetvol.docgen"
    )


def test_function_reference_lists_every_worksheet_name():
    text = docgen.render()
    for name, _, _ in registry.worksheet_names():
        assert name in text
