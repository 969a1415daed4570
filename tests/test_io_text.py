"""Delimited text through pandas: the same numbers and the same messages as a plain parser."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from jjpattern.errors import InputError
from jjpattern.io import load, read
from jjpattern.io.text import parse_table

MISSING = {"", "nan", "na", "n/a", "none", "null", "-", "--"}


def reference(text, source="f"):
    """The documented format, parsed line by line with Python's float (common practice).

    Returns ``(metadata, columns)`` or the message of the first mistake.
    """
    lines = text.split("\n")
    metadata, i = {}, 0
    while not lines[i].strip() or lines[i].strip().startswith("#"):
        s = lines[i].strip()
        if s.startswith("#") and ":" in s:
            key, value = s[1:].split(":", 1)
            metadata[key.strip()] = value.strip()
        i += 1
    header = lines[i].strip()
    delim = next((d for d in (",", "\t", ";") if d in header), None)
    if delim is None:  # a unit in brackets belongs to the name before it: 'B (mT)'
        names = []
        for token in header.split():
            if names and token[0] in "([":
                names[-1] += " " + token
            else:
                names.append(token)
    else:
        names = [n.strip() for n in header.split(delim)]
    rows = []
    blank = " " if delim == "\t" else " \t"  # a tab is a cell boundary in a TSV, even first
    for k in range(i + 1, len(lines)):
        s = lines[k].strip(blank)
        if not s or s.startswith("#"):
            continue
        cells = s.split() if delim is None else [c.strip() for c in s.split(delim)]
        if delim is not None and len(cells) == len(names) + 1 and cells[-1] == "":
            cells.pop()
        if len(cells) != len(names):
            word = "field" if len(cells) == 1 else "fields"
            return (f"{source}: line {k + 1} has {len(cells)} {word} but the header has "
                    f"{len(names)}; fix or delete that row")
        rows.append((k + 1, cells))
    if not rows:
        return f"{source}: the file has a header but no data rows"
    columns = {}
    for c, name in enumerate(names):
        values = []
        for number, cells in rows:
            cell = cells[c]
            if cell.lower() in MISSING:
                values.append(np.nan)
                continue
            try:
                values.append(float(cell))
            except ValueError:
                values = (f"{source}: line {number}, column {name!r}: {cell!r} is not a "
                          "number; expected a header row followed by rows of numbers")
                break
        columns[name] = values if isinstance(values, str) else np.array(values)
    if all(isinstance(v, str) for v in columns.values()):
        return next(iter(columns.values()))
    return metadata, columns


NUMBER = st.one_of(
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.floats(-1e6, 1e6, allow_nan=False).map(lambda x: f"{x:.6g}"),
    st.integers(-10**6, 10**6).map(str),
)
CELL = st.one_of(NUMBER, NUMBER, NUMBER, st.sampled_from(["", "nan", "NaN", "n/a", "-", "None",
                                                          "abc", "ok", "1.5.2", "2 # x"]))


@st.composite
def tables(draw):
    delim = draw(st.sampled_from([",", "\t", ";", " "]))
    n = draw(st.integers(2, 4))
    names = ["B (mT)", "Ic (uA)", "Ic- (uA)", "status"][:n]
    lines = ["# junction: J1", ""] if draw(st.booleans()) else []
    lines.append(delim.join(names))
    for _ in range(draw(st.integers(0, 12))):
        kind = draw(st.sampled_from(["row"] * 8 + ["blank", "comment", "short", "trailing"]))
        if kind == "blank":
            lines.append(draw(st.sampled_from(["", "  ", "\t"])))
        elif kind == "comment":
            lines.append(draw(st.sampled_from(["# note", "  # indented note"])))
        else:
            width = n - 1 if kind == "short" else n
            cells = [draw(CELL) for _ in range(width)]
            if delim == " ":
                cells = [c.replace(" ", "") or "nan" for c in cells]
            lines.append(delim.join(cells) + (delim if kind == "trailing" else ""))
    return "\n".join(lines) + draw(st.sampled_from(["", "\n"]))


@settings(max_examples=120, deadline=None)
@given(text=tables())
def test_pandas_reading_agrees_with_a_plain_parser(text):
    expected = reference(text)
    try:
        got = parse_table(text, "f")
    except InputError as exc:
        assert str(exc) == expected
        return
    assert not isinstance(expected, str), expected
    assert got[0] == expected[0]
    assert list(got[1]) == list(expected[1])
    for name, values in expected[1].items():
        if isinstance(values, str):
            assert got[1][name] == values
        else:
            assert np.array_equal(got[1][name], values, equal_nan=True)


def test_non_number_named_by_file_line_and_column(tmp_path):
    path = tmp_path / "s.csv"
    rows = "".join(f"{b},{b + 1}\n" for b in range(12))
    path.write_text("# chip: Q\n\nB (mT),Ic (uA)\n1,2\n\n# pause\n3,abc\n" + rows)
    with pytest.raises(InputError, match=r"s\.csv: line 7, column 'Ic \(uA\)': 'abc' is not "
                                         r"a number"):
        load(path)


@pytest.mark.parametrize(("body", "message"), [
    ("1,2\n3\n", "line 3 has 1 field but the header has 2"),
    ("1,2\n3,4,5\n", "line 3 has 3 fields but the header has 2"),
    ("1,2,3\n3,4\n", "line 2 has 3 fields but the header has 2"),
    ("\n\n", "no data rows"),
])
def test_rows_of_the_wrong_length(tmp_path, body, message):
    path = tmp_path / "r.csv"
    path.write_text("B (mT),Ic (uA)\n" + body)
    with pytest.raises(InputError, match=message):
        load(path)


def test_trailing_delimiters_words_in_unused_columns_and_missing_cells(tmp_path):
    b = np.linspace(-3, 3, 31)
    rows = []
    for k, x in enumerate(b):
        ic = "n/a" if k == 4 else f"{10 * abs(np.sinc(x)):.6f}"
        rows.append(f"{x:.4f};{ic};{'ok' if k % 2 else 'switching'}" + (";" if k % 3 else ""))
    path = tmp_path / "s.txt"
    path.write_text("B (mT);Ic (uA);status\n" + "\n".join(rows) + "\n")
    branch = load(path).branches[0]
    assert branch.points_used == 30 and branch.points_dropped == 1
    assert branch.ic_A.max() == pytest.approx(10e-6)


def test_line_endings_byte_order_mark_and_latin1_micro(tmp_path):
    b = np.linspace(-3, 3, 21)
    body = "".join(f"{x},{abs(np.sinc(x))}\r\n" for x in b)
    (tmp_path / "crlf.csv").write_bytes(("B (mT),Ic (uA)\r\n" + body).encode())
    (tmp_path / "bom.csv").write_bytes(b"\xef\xbb\xbf" + ("B (mT),Ic (uA)\n" + body).encode())
    # 0xB5 is the micro sign in Latin-1 (ISO 8859-1 table).
    (tmp_path / "latin.csv").write_bytes(b"B (mT),Ic (\xb5A)\n" + body.encode())
    for name in ("crlf.csv", "bom.csv", "latin.csv"):
        branch = load(tmp_path / name).branches[0]
        assert branch.field_T[0] == pytest.approx(-3e-3)
        assert branch.ic_A.max() == pytest.approx(1e-6)


def test_numbers_equal_pythons_correctly_rounded_float(tmp_path):
    rng = np.random.default_rng(7)
    values = rng.normal(size=(500, 2)) * 10.0 ** rng.integers(-30, 30, size=(500, 2))
    text = "B (T),V (V)\n" + "".join(f"{a!r},{b:.17e}\n" for a, b in values.tolist())
    _, columns = parse_table(text, "f")
    # Python's float() rounds correctly (IEEE 754, common practice): repr round-trips.
    assert np.array_equal(columns["B (T)"], values[:, 0])
    assert np.array_equal(columns["V (V)"], [float(f"{b:.17e}") for b in values[:, 1]])


def test_long_table_map_through_the_text_reader(tmp_path):
    path = tmp_path / "long.tsv"
    bias = np.linspace(-4, 4, 9)
    lines = ["# cooldown: 3", "B (mT)\tI (uA)\tV (uV)"]
    for b in (1.0, -1.0, 0.0):  # field stepped down then back to zero
        lines += [f"{b}\t{i}\t{0.5 * i * (b + 2)}" for i in bias]
    path.write_text("\n".join(lines) + "\n")
    got = read(path)
    assert got.layout == "long table" and got.metadata == {"cooldown": "3"}
    assert np.array_equal(got.field_T, [-1e-3, 0.0, 1e-3])
    assert got.bias_A.strides[0] == 0
    assert np.allclose(got.signal[0], 0.5 * bias * 1.0 * 1e-6, rtol=1e-12, atol=0)
