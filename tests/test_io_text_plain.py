"""Small plain tables are parsed without pandas: the same numbers and messages as pandas.

The reference is the reader's own pandas path (``pandas.read_csv``, forced by setting
the plain-table size limit below zero), run on the same text.
"""

from unittest import mock

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from jjpattern.errors import InputError
from jjpattern.io import text


def outcome(body, decimal=None, pandas=False):
    """``read_table`` of ``body``: (metadata, columns, layout) or the message, and the path."""
    taken = []
    plain = text._Rows._plain

    def spy(rows):
        taken.append(plain(rows) is not None)
        return None if pandas else plain(rows)

    with mock.patch.object(text._Rows, "_plain", spy):
        try:
            got = text.read_table(body, "f", decimal)
        except InputError as exc:
            got = str(exc)
    return got, bool(taken and taken[0])


def assert_same(got, expected):
    if isinstance(expected, str):
        assert got == expected
        return
    assert not isinstance(got, str), got
    assert (got[0], list(got[1]), got[2]) == (expected[0], list(expected[1]), expected[2])
    for name, want in expected[1].items():
        have = got[1][name]
        if isinstance(want, str):
            assert have == want
            continue
        want, have = np.asarray(want), np.asarray(have)
        assert have.dtype == want.dtype == np.float64 and have.shape == want.shape
        assert np.array_equal(np.isnan(have), np.isnan(want))
        # Bit for bit, the sign of a zero included.
        assert np.array_equal(have.view(np.int64)[~np.isnan(want)],
                              want.view(np.int64)[~np.isnan(want)])


PLAIN = st.one_of(
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.floats(-1e6, 1e6, allow_nan=False).map(lambda x: f"{x:.6g}"),
    st.integers(-10**6, 10**6).map(str),
    st.sampled_from(["", "nan", "NaN", "N/A", "-", "--", "None", "-0", "+.5", "1.", "1.e3",
                     "0007", "1E-3"]),
)
ODD = st.sampled_from(["abc", "inf", "1_0", "1e", ".", '"1"', "1 ", "\t1", "\u0661", "0x1",
                       "1e400", "1,5", "1.5.2"])


@st.composite
def tables(draw):
    """Plain tables, about half of them with one odd cell, line or separator somewhere."""
    delim = draw(st.sampled_from([",", "\t", ";", " "]))
    n = draw(st.integers(2, 3))
    rows = [[draw(PLAIN) for _ in range(n)] for _ in range(draw(st.integers(0, 10)))]
    if delim == " ":
        rows = [[c or "nan" for c in row] for row in rows]
    lines = [delim.join(row) for row in rows]
    flaw = draw(st.sampled_from(["none"] * 5 + ["cell", "line", "lead", "tail"]))
    if flaw != "none" and lines:
        k = draw(st.integers(0, len(lines) - 1))
        if flaw == "cell":
            rows[k][draw(st.integers(0, n - 1))] = draw(ODD)
            lines[k] = delim.join(rows[k])
        elif flaw == "line":
            lines.insert(k, draw(st.sampled_from(["", " ", "\t", ",", ";", "# note", "1",
                                                  "1,2,3,4"])))
        else:
            lines[k] = " " + lines[k] if flaw == "lead" else lines[k] + delim
    header = delim.join(["B_mT", "Ic_uA", "Ir_uA"][:n])
    return "\n".join(["# chip: KT-14", header, *lines]) + draw(st.sampled_from(["", "\n"]))


@settings(max_examples=150, deadline=None)
@given(body=tables(), decimal=st.sampled_from([None, "."]))
def test_plain_tables_read_as_pandas_reads_them(body, decimal):
    assert_same(outcome(body, decimal)[0], outcome(body, decimal, pandas=True)[0])


@pytest.mark.parametrize(("body", "decimal"), [
    ("B;Ic\n1,5;2,25\n-3;4,0\n", None),  # decimal comma read from the cells
    ("B\tIc\n1,5\t2\n3\t-\n", ","),
    ("B,Ic\n1,5\n2,\n", None),  # a missing last cell: the ambiguous comma is named
    ("B,Ic\n1,2\n,\n3,4\n", None),
    ("B\tIc\n1\t2\n\t\n", None),  # an empty first cell: a tab is a cell boundary
    ("B Ic\n 1 2\n\t3\t4\n", None),
    ("B,Ic\n 1, 2\n-0,+0\n", None),
])
def test_decimal_commas_missing_cells_and_spaces(body, decimal):
    got, plain = outcome(body, decimal)
    assert plain
    assert_same(got, outcome(body, decimal, pandas=True)[0])


def test_numbers_correctly_rounded_and_large_tables_left_to_pandas():
    rng = np.random.default_rng(3)
    values = rng.normal(size=(400, 2)) * 10.0 ** rng.integers(-300, 300, size=(400, 2))
    body = "B (T),V (V)\n" + "".join(f"{a!r},{b!r}\n" for a, b in values.tolist())
    (_, columns, _), plain = outcome(body)
    assert plain
    # repr round-trips through a correctly rounded float (IEEE 754; Python's float, common
    # practice), so the parsed values are the ones written.
    assert np.array_equal(columns["B (T)"], values[:, 0])
    assert np.array_equal(columns["V (V)"], values[:, 1])
    big = "B (T),V (V)\n" + "1.5,2.5\n" * (text.PLAIN_MAX_CHARS // 8 + 1)
    (_, columns, _), plain = outcome(big)
    assert not plain and columns["V (V)"].size == text.PLAIN_MAX_CHARS // 8 + 1
