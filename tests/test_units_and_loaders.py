"""Unit parsing and every loader, on small files written by the tests."""

import json

import h5py
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from jjpattern.errors import InputError
from jjpattern.io import load
from jjpattern.io.units import current_factor, field_factor, split_header

# Field units to tesla; 1 Oe of mu0*H is 1e-4 T, 1 G = 1e-4 T (SI brochure, CGS table).
FIELD_CASES = [
    ("T", 1.0), ("mT", 1e-3), ("uT", 1e-6), ("\u00b5T", 1e-6), ("\u03bcT", 1e-6),
    ("nT", 1e-9), ("G", 1e-4), ("Oe", 1e-4), ("kG", 0.1),
]
CURRENT_CASES = [
    ("A", 1.0), ("mA", 1e-3), ("uA", 1e-6), ("\u00b5A", 1e-6), ("\u03bcA", 1e-6),
    ("nA", 1e-9), ("pA", 1e-12),
]


@pytest.mark.parametrize(("unit", "factor"), FIELD_CASES)
def test_field_units(unit, factor):
    assert field_factor(unit, "here") == pytest.approx(factor, rel=1e-15)


@pytest.mark.parametrize(("unit", "factor"), CURRENT_CASES)
def test_current_units(unit, factor):
    assert current_factor(unit, "here") == pytest.approx(factor, rel=1e-15)


@pytest.mark.parametrize(("header", "name", "unit"), [
    ("B (mT)", "B", "mT"), ("B [mT]", "B", "mT"), ("B_mT", "B", "mT"), ("field_G", "field", "G"),
    ("Ic (uA)", "Ic", "uA"), ("Ic_\u00b5A", "Ic", "\u00b5A"), ("ic_pos", "ic_pos", None),
    ("Ic+ [nA]", "Ic+", "nA"), ("Isw", "Isw", None),
])
def test_split_header(header, name, unit):
    assert split_header(header) == (name, unit)


def test_unknown_unit_names_column_and_fix():
    with pytest.raises(InputError, match=r"'B \(furlong\)'.*unknown field unit 'furlong'.*"
                                         r"--field-unit"):
        field_factor("furlong", "f.csv: column 'B (furlong)'")


def _pattern_rows(n=41):
    b = np.linspace(-3, 3, n)
    return b, 10 * np.abs(np.sinc(b))


def test_csv_with_metadata_two_branches_and_cleanup(tmp_path):
    b, ic = _pattern_rows()
    lines = ["# junction: TR-2", "# temperature_K = 0.3", "B (mT),Ic+ (uA),Ic- (uA)"]
    lines += [f"{x},{y},{-y * 0.9}" for x, y in zip(b[::-1], ic[::-1], strict=True)]
    lines.append("nan,1,1")
    lines.append(f"{b[3]},{ic[3] + 2},{-ic[3] * 0.9}")  # duplicate field, averaged
    path = tmp_path / "s.csv"
    path.write_text("\n".join(lines) + "\n")
    sweep = load(path)
    assert sweep.metadata == {"junction": "TR-2", "temperature_K": "0.3"}
    pos, neg = sweep.branch("positive"), sweep.branch("negative")
    assert np.all(np.diff(pos.field_T) > 0)
    assert pos.field_T[0] == pytest.approx(-3e-3)
    assert pos.points_used == 41 and pos.points_dropped == 1 and pos.duplicates_merged == 1
    assert pos.ic_A[3] == pytest.approx((ic[3] + 1) * 1e-6)
    assert neg.ic_A[5] == pytest.approx(0.9 * ic[5] * 1e-6)
    assert sweep.summary()["points_dropped"] == 2
    assert len(sweep.sha256) == 64


@pytest.mark.parametrize("sep", ["\t", ";", "   "])
def test_other_delimiters(tmp_path, sep):
    b, ic = _pattern_rows()
    header = sep.join(["field (G)", "Isw (nA)"])
    body = "\n".join(f"{x}{sep}{y}" for x, y in zip(b, ic, strict=True))
    path = tmp_path / "s.txt"
    path.write_text(header + "\n" + body + "\n")
    br = load(path).branches[0]
    assert br.name == "positive"
    assert br.field_T[-1] == pytest.approx(3e-4)
    assert br.ic_A.max() == pytest.approx(10e-9)


def test_explicit_columns_and_units(tmp_path):
    b, ic = _pattern_rows()
    path = tmp_path / "s.csv"
    path.write_text("x,y,z\n" + "\n".join(f"{p},{q},{q}" for p, q in zip(b, ic, strict=True)))
    sweep = load(path, field_col="x", ic_cols=["z"], field_unit="mT", current_unit="mA")
    assert sweep.branches[0].column == "z"
    assert sweep.branches[0].ic_A.max() == pytest.approx(10e-3)


def test_negative_branch_named_as_magnitude(tmp_path):
    b, ic = _pattern_rows()
    path = tmp_path / "s.csv"
    path.write_text("B_mT,Ic_neg_uA\n" + "\n".join(f"{p},{q}" for p, q in
                                                  zip(b, ic, strict=True)))
    sweep = load(path)
    assert [x.name for x in sweep.branches] == ["negative"]
    assert sweep.branches[0].ic_A.max() == pytest.approx(10e-6)


def test_hdf5_default_layout_and_paths(tmp_path):
    b, ic = _pattern_rows()
    path = tmp_path / "s.h5"
    with h5py.File(path, "w") as f:
        f.attrs["chip"] = "Q-9"
        f.create_dataset("field", data=b).attrs["units"] = "mT"
        f.create_dataset("ic_pos", data=ic).attrs["units"] = b"uA"
        f.create_dataset("ic_neg", data=-ic).attrs["units"] = "uA"
        g = f.create_group("raw")
        g.create_dataset("B", data=b * 10).attrs["units"] = "G"
        g.create_dataset("I", data=ic * 1e3).attrs["units"] = "nA"
    sweep = load(path)
    assert sweep.metadata == {"chip": "Q-9"}
    assert [x.name for x in sweep.branches] == ["positive", "negative"]
    other = load(path, field_col="raw/B", ic_cols=["raw/I"])
    assert np.allclose(other.branches[0].field_T, sweep.branches[0].field_T)
    assert np.allclose(other.branches[0].ic_A, sweep.branches[0].ic_A)


def test_npz_without_pickle(tmp_path):
    b, ic = _pattern_rows()
    path = tmp_path / "s.npz"
    np.savez(path, B_mT=b, Ic_uA=ic, metadata=np.array(json.dumps({"junction": "N1"})))
    sweep = load(path)
    assert sweep.metadata == {"junction": "N1"}
    assert sweep.branches[0].ic_A.max() == pytest.approx(10e-6)


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(text=st.text(alphabet=st.characters(codec="utf-8"), max_size=400))
def test_any_text_file_loads_or_gives_input_error(tmp_path, text):
    # Property: whatever a user feeds in, the loader answers with a Sweep or an InputError.
    path = tmp_path / "fuzz.csv"
    path.write_text(text, encoding="utf-8")
    try:
        load(path)
    except InputError as exc:
        assert str(exc).startswith(str(path))


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.tuples(st.floats(allow_nan=True, allow_infinity=True, width=32),
                               st.floats(allow_nan=True, allow_infinity=True, width=32)),
                     max_size=60))
def test_any_numeric_table_loads_or_gives_input_error(tmp_path, rows):
    path = tmp_path / "nums.csv"
    path.write_text("B (mT),Ic (uA)\n" + "".join(f"{a},{b}\n" for a, b in rows))
    try:
        sweep = load(path)
    except InputError:
        return
    for branch in sweep.branches:
        assert np.all(np.isfinite(branch.field_T)) and np.all(np.diff(branch.field_T) > 0)
        assert branch.points_used >= 10
