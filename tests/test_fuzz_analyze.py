"""Property-based tests through :func:`jjpattern.pipeline.analyze` with default settings.

Sweeps of any scale (fields from 1e-310 to 1e308 T, currents from 1e-310 to 1e160 A),
with glitches, repeated fields and missing values, and mutated valid files: every
outcome is a Result or an InputError, and every Result is finite and self-consistent
(effective area = Phi0 / period with Phi0 = h / 2e from scipy.constants, standard errors
not negative) or says why a number is missing (``fuzz_helpers.check_result``).
"""

from __future__ import annotations

import itertools
import warnings

import numpy as np
import pytest
from fuzz_helpers import BASES, check_result, examples, mutate
from hypothesis import given, settings
from hypothesis import strategies as st

from jjpattern.errors import InputError
from jjpattern.io.limits import MAX_CURRENT_A, MAX_FIELD_T, MIN_CURRENT_A, MIN_FIELD_SPAN_T
from jjpattern.pipeline import analyze

_counter = itertools.count()


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz_analyze")


def _analyse(path):
    """The Result (checked) or the InputError message; any other exception fails the test."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # fits may warn; crashes are what is looked for
        try:
            result = analyze(path)
        except InputError as exc:
            assert "\n" not in str(exc)
            return str(exc)
    check_result(result)
    return result


@st.composite
def sweeps(draw):
    """A sweep table in T and A: a |sinc| pattern at any scale, with measured-data faults."""
    n = draw(st.integers(4, 60))
    # Half the draws near the limits (where fits are attempted), half anywhere.
    field_scale = 10.0 ** draw(st.floats(-13, 3.5) | st.floats(-312, 308))
    current_scale = 10.0 ** draw(st.floats(-19, 3.5) | st.floats(-312, 160))
    periods = draw(st.floats(0.3, 8))
    seed = draw(st.integers(0, 2**16))
    rng = np.random.default_rng(seed)
    x = np.linspace(-periods / 2, periods / 2, n)
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        field = x * field_scale
        ic = np.abs(np.sinc(x) + rng.normal(0, 0.03, n)) * current_scale
    fault = draw(st.sampled_from(["none", "glitch", "nan", "repeat", "constant", "inf"]))
    if fault == "glitch":
        ic[draw(st.integers(0, n - 1))] = draw(st.sampled_from([1e308, 1e160, -5.0, 0.0]))
    elif fault == "nan":
        field[draw(st.integers(0, n - 1))] = np.nan
    elif fault == "repeat":
        field = np.repeat(field[: (n + 1) // 2], 2)[:n]
    elif fault == "constant":
        ic[:] = current_scale
    elif fault == "inf":
        ic[draw(st.integers(0, n - 1))] = np.inf
    return field, ic


@settings(max_examples=examples(60))
@given(sweep=sweeps())
def test_sweeps_of_any_scale_analyse_or_say_why(folder, sweep):
    field, ic = sweep
    path = folder / f"{next(_counter)}.csv"
    rows = "\n".join(f"{b!r},{i!r}" for b, i in zip(field.tolist(), ic.tolist(), strict=True))
    path.write_text("B (T),Ic (A)\n" + rows + "\n")
    outcome = _analyse(str(path))
    finite = np.isfinite(field) & np.isfinite(ic)
    inside = (np.all(np.abs(field[finite]) <= MAX_FIELD_T)
              and np.all(np.abs(ic[finite]) <= MAX_CURRENT_A))
    if not inside:  # beyond the stated limits: always refused, never fitted
        assert isinstance(outcome, str), "a value beyond the limits was fitted"
    if isinstance(outcome, str):
        return
    assert np.ptp(field[finite]) >= MIN_FIELD_SPAN_T
    assert np.abs(ic[finite]).max() >= MIN_CURRENT_A


@settings(max_examples=examples(30))
@given(name=st.sampled_from(["sweep.csv", "sweep.h5", "sweep.npz", "sweep.mat"]),
       operations=st.lists(st.tuples(st.sampled_from(["flip", "overwrite", "insert"]),
                                     st.integers(0, 2**31), st.binary(min_size=1, max_size=4)),
                           min_size=1, max_size=2))
def test_mutated_files_analyse_or_say_why(folder, name, operations):
    path = folder / f"{next(_counter)}_{name}"
    path.write_bytes(mutate(BASES[name], operations))
    _analyse(str(path))


@pytest.mark.parametrize("field_scale_T, current_scale_A",
                         [(1e-3, 1e-6), (1e-11, 1e-15), (1e-12, 1e-17), (1e2, 1e2), (3e-9, 5e2)])
def test_accepted_scales_fit_alike(tmp_path, field_scale_T, current_scale_A):
    """Inside the stated limits a pattern fits the same at any scale: the period and Ic0
    of |sinc(B / period)| (Fraunhofer formula, common practice) come back within 2 and 3 %."""
    rng = np.random.default_rng(15)
    x = np.linspace(-3.5, 3.5, 141)
    ic = np.abs(np.sinc(x) + rng.normal(0, 0.02, x.size)) * current_scale_A
    path = tmp_path / "scaled.csv"
    np.savetxt(path, np.column_stack([x * field_scale_T, ic]), delimiter=",",
               header="B (T),Ic (A)", comments="")
    fit = _analyse(str(path)).fits[0]
    assert fit.period_T == pytest.approx(field_scale_T, rel=0.02)
    assert fit.ic0_A == pytest.approx(current_scale_A, rel=0.03)
