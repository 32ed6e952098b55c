"""The benchmarks stay runnable (their timings are printed, never asserted)."""

from __future__ import annotations

import re

import pytest
import talib

from benches import addin as bench_addin
from benches import kernels as bench


def test_kernel_benchmark_runs_and_prints_ratios(capsys):
    assert bench.main(["--bars", "3000", "--repeat", "1", "--scaling", "2000", "6000"]) in (0, None)
    out = capsys.readouterr().out
    assert "dispersion" in out and "ratio" in out.lower()


def test_kernel_benchmark_prints_a_verdict_per_target(capsys):
    # One line per target: speed against TA-Lib and cost per bar at two sizes, each
    # with its ratio and "met" or "NOT MET"; accuracy lines for every target kernel.
    bench.main(["--bars", "3000", "--repeat", "1", "--scaling", "2000", "6000"])
    lines = capsys.readouterr().out.splitlines()
    for tgt in bench.targets(talib):
        for kind in ("speed", "scaling"):
            found = [ln for ln in lines if ln.split()[:1] == [kind] and tgt.name in ln]
            assert len(found) == 1, (kind, tgt.name)
            assert re.search(r"\d+\.\d+x \(target [\d.]+x", found[0])
            assert found[0].endswith(": met") or found[0].endswith(": NOT MET")
        # Beside it, what reading the same columns and writing fresh outputs costs at
        # both sizes (the part of the growth memory accounts for, measured in the run).
        floor = [ln for ln in lines if ln.split()[:1] == ["floor"] and tgt.name in ln]
        assert len(floor) == 1 and f"read {len(tgt.columns)}, write {tgt.outputs}" in floor[0]
        assert re.search(r"[\d.]+ -> +[\d.]+ ns/bar \(\+?-?[\d.]+\)", floor[0])
    accuracy = [ln for ln in lines if ln.split()[:1] == ["accuracy"]]
    assert len(accuracy) == 6 and all(ln.endswith(": met") for ln in accuracy)


def test_kernel_benchmark_stops_when_accuracy_is_off(monkeypatch):
    # The accuracy of the target kernels is asserted by the benchmark itself: a kernel
    # that is off by 1e-12 relative makes the run fail.
    real = bench.moving_average

    def off(prices, period=14, kind="simple", seed="average"):
        return real(prices, period, kind, seed) * (1.0 + 1e-12)

    monkeypatch.setattr(bench, "moving_average", off)
    with pytest.raises(AssertionError, match="EMA"):
        bench.main(["--bars", "3000", "--repeat", "1", "--scaling", "2000", "6000"])


def test_addin_benchmark_runs(capsys):
    # The exit code reports the time budget, so it depends on the machine: not asserted.
    bench_addin.main(["--rows", "2000", "--repeat", "1", "--fill-down", "50"])
    out = capsys.readouterr().out
    assert "SV_DEVIATION whole column" in out and "filled-down" in out
    # The floor of a whole-column argument, and the budget per whole-column argument.
    assert re.search(r"floor: taking the cells out of one whole column's 1,048,576 row "
                     r"tuples once.*median [\d.]+ ms", out)
    assert re.search(r"verdict: SV_ATR whole columns \(3\), read \+ compute \+ write "
                     r"[\d.]+ ms, budget 150 ms \(50 ms per whole-column argument, 3 here\): "
                     r"(met|NOT met)", out)
    # One verdict per per-cell form timed, each with its ratio to the target.
    forms = [k for k in bench_addin.per_cell(repeat=1, number=1) if k != bench_addin.REFERENCE]
    for form in forms:
        found = [ln for ln in out.splitlines() if ln.startswith(f"verdict: per-cell {form},")]
        assert len(found) == 1, form
        assert re.search(r": (met|NOT met) \(x\d+\.\d\d; reference", found[0])


def test_kernel_benchmark_prints_the_fixed_cost_of_each_kernel_at_300_bars(capsys):
    assert bench.main(["--short-only", "--repeat", "1"]) == 0
    lines = [ln for ln in capsys.readouterr().out.splitlines() if ln.split()[:1] == ["short"]]
    names = [name for name, *_ in bench.short_kernels(talib)]
    assert len(lines) == len(names) >= 9
    for name, line in zip(names, lines, strict=True):
        assert name in line and re.search(r"\d+\.\d us vs ", line)
        assert line.endswith(": met") or line.endswith(": NOT met")
