"""The batch manifest: units in headers, per-row settings, and one clear message per mistake."""

import os

import pytest
from scipy.constants import electron_volt

from jjpattern.batch.manifest import read_manifest, write_starter_manifest
from jjpattern.errors import InputError
from jjpattern.settings import Settings


def write(folder, text, name="manifest.csv", files=("kt14/j01.csv", "kt14/j02.csv")):
    for f in files:
        path = folder / f
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text("B (mT),Ic (uA)\n")
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_units_overrides_and_metadata(tmp_path):
    path = write(tmp_path, (
        "# Kestrel Low-Temperature Lab, chip KT-14, cooldown 3\n"
        "file,junction,chip,cooldown,L [µm],width_um,area (µm²),x (mm),y (mm),loss,"
        "fit.node_floor,seed,electrode (nm),planar,gap (meV),jc (kA/cm2),model,notes\n"
        "kt14/j01.csv,J01,KT-14,3,10,5,48,1.5,-2,cauchy,off,7,\"150,200\",yes,1.4,1.2,"
        "circular,clean\n"
        "\n"
        "kt14/j02.csv,J02,KT-14,3,,,,0,0,,,,,,,,,\n"))
    first, second = read_manifest(path)
    assert (first.row_number, second.row_number) == (3, 5)  # comment = row 1, header = row 2
    assert first.file_path == str(tmp_path / "kt14" / "j01.csv")
    assert (first.junction, first.chip, first.cooldown) == ("J01", "KT-14", "3")
    assert (first.x, first.y, first.xy_unit) == (1.5e-3, -2e-3, "m")
    assert first.area_m2 == pytest.approx(48e-12, rel=1e-15)
    o = first.settings_overrides
    assert o["junction.length_m"] == 1e-5 and o["junction.width_m"] == 5e-6
    assert o["junction.electrode_m"] == pytest.approx((150e-9, 200e-9), rel=1e-15)
    assert o["junction.jc_A_m2"] == pytest.approx(1.2e7)  # 1 kA/cm^2 = 1e7 A/m^2
    # 1 eV = e x 1 V (scipy.constants).
    assert o["extract.gap_J"] == pytest.approx(1.4e-3 * electron_volt, rel=1e-12)
    assert (o["fit.loss"], o["fit.node_floor"], o["diagnose.seed"], o["junction.planar"],
            o["fit.model"]) == ("cauchy", "off", 7, True, "circular")
    assert first.metadata == {"notes": "clean"}
    settings = first.settings()
    assert settings == Settings().replace(**{k.replace(".", "__"): v for k, v in o.items()})
    assert settings.fit.loss == "cauchy" and settings.junction.length_m == 1e-5
    assert first.length_m == 1e-5 and first.width_m == 5e-6
    # Empty cells keep the defaults.
    assert second.settings_overrides == {} and second.settings() == Settings()
    assert second.area_m2 is None and (second.x, second.y) == (0.0, 0.0)


def test_semicolon_tabs_bare_positions_and_si_names(tmp_path):
    path = write(tmp_path, "file;junction;x;y;length_m;node-floor;extract.tc_K\n"
                           "kt14/j01.csv;J01;3;4;1.2e-05;on;9.2\n")
    (row,) = read_manifest(path)
    assert (row.x, row.y, row.xy_unit) == (3.0, 4.0, "")
    assert row.settings_overrides == {"junction.length_m": 1.2e-5, "fit.node_floor": "on",
                                      "extract.tc_K": 9.2}
    path = write(tmp_path, "file\tjunction\tL (nm)\ttemperature (mK)\n"
                           "kt14/j02.csv\tJ02\t800\t300\n", name="tabs.tsv")
    (row,) = read_manifest(path)
    assert row.settings_overrides == {"junction.length_m": 8e-7, "extract.temperature_K": 0.3}


ERRORS = [
    # (manifest text, words every message must contain)
    ("junction,chip\nJ01,KT-14\n", ["row 1", "'file'"]),
    ("file,chip\nkt14/j01.csv,KT-14\n", ["row 1", "'junction'"]),
    ("file,junction\nkt14/j01.csv,\n", ["row 2", "'junction'", "empty"]),
    ("file,junction,L (um)\nkt14/j01.csv,J01,ten\n", ["row 2", "'L (um)'", "not a number"]),
    ("file,junction,L (um)\nkt14/j01.csv,J01,-3\n", ["row 2", "'L (um)'", "positive"]),
    ("file,junction,L (inch)\nkt14/j01.csv,J01,3\n", ["row 1", "'L (inch)'", "unknown unit"]),
    ("file,junction,length\nkt14/j01.csv,J01,3\n", ["row 1", "'length'", "needs a unit"]),
    ("file,junction,area\nkt14/j01.csv,J01,3\n", ["row 1", "'area'", "needs a unit"]),
    ("file,junction\nkt14/j09.csv,J01\n", ["row 2", "'file'", "does not exist"]),
    ("file,junction,chip\nkt14/j01.csv,J01,KT-14\nkt14/j02.csv,J01,KT-14\n",
     ["row 3", "row 2", "junction", "chip"]),
    ("file,junction,los\nkt14/j01.csv,J01,cauchy\n", ["row 1", "'los'", "'loss'"]),
    ("file,junction,fit.speed\nkt14/j01.csv,J01,3\n", ["row 1", "'fit.speed'", "not a setting"]),
    ("file,junction,seed\nkt14/j01.csv,J01,2.5\n", ["row 2", "'seed'", "whole number"]),
    ("file,junction,planar\nkt14/j01.csv,J01,maybe\n", ["row 2", "'planar'", "yes or no"]),
    ("file,junction,model\nkt14/j01.csv,J01,triangle\n", ["row 2", "'model'", "rectangular"]),
    ("file,junction,x\nkt14/j01.csv,J01,3\n", ["row 1", "'x'", "'y'"]),
    ("file,junction,x (mm),y\nkt14/j01.csv,J01,3,4\n", ["row 1", "'x (mm)'", "unit"]),
    ("file,junction,x,y\nkt14/j01.csv,J01,3,\n", ["row 2", "'x'", "'y'"]),
    ("file,junction,L (um),length_m\nkt14/j01.csv,J01,3,3e-6\n", ["row 1", "'L (um)'",
                                                                  "'length_m'", "keep one"]),
    ("file,junction\nkt14/j01.csv,J01,extra\n", ["row 2", "more cells", "quote"]),
    ("file,junction\n", ["no junction"]),
    ("# only a comment\n", ["empty"]),
]


@pytest.mark.parametrize("text,words", ERRORS)
def test_each_mistake_names_file_row_and_column(tmp_path, text, words):
    path = write(tmp_path, text)
    with pytest.raises(InputError) as info:
        read_manifest(path)
    message = str(info.value)
    assert message.startswith(path)
    for word in words:
        assert word in message, message
    assert "; " in message  # the problem, then the fix
    assert "\n" not in message


def test_missing_files_can_be_left_to_the_runner(tmp_path):
    path = write(tmp_path, "file,junction\nkt14/j09.csv,J09\n")
    (row,) = read_manifest(path, check_files=False)
    assert row.file_path == str(tmp_path / "kt14" / "j09.csv")


def test_duplicates_are_told_apart_by_chip_or_cooldown(tmp_path):
    path = write(tmp_path, "file,junction,chip,cooldown\n"
                           "kt14/j01.csv,J01,KT-14,1\nkt14/j02.csv,J01,KT-14,2\n"
                           "kt14/j01.csv,J01,KT-15,1\n")
    assert len(read_manifest(path)) == 3


def test_starter_manifest_lists_readable_entries_and_reads_back(tmp_path):
    data = tmp_path / "cooldown3"
    for name in ("j10.csv", "j2.csv", "j1.h5", "notes.txt", ".hidden.csv",
                 "chipB/j3.csv", "ivmap_j4/iv_001.txt", "ivmap_j4/iv_002.txt"):
        (data / name).parent.mkdir(parents=True, exist_ok=True)
        (data / name).write_text("x")

    def can_read(path):
        return path.endswith((".csv", ".h5")) or os.path.basename(path).startswith("ivmap")

    out = tmp_path / "manifest.csv"
    written = write_starter_manifest(data, out, can_read)
    assert written == ["cooldown3/chipB/j3.csv", "cooldown3/ivmap_j4", "cooldown3/j1.h5",
                       "cooldown3/j2.csv", "cooldown3/j10.csv"]
    rows = read_manifest(out)
    assert [r.junction for r in rows] == ["j3", "ivmap_j4", "j1", "j2", "j10"]
    assert rows[1].file_path == str(data / "ivmap_j4")
    assert all(r.settings_overrides == {} and r.area_m2 is None for r in rows)
    header = out.read_text(encoding="utf-8").splitlines()[0]
    assert header == "file,junction,chip,cooldown,length (um),width (um),area (um2),x (mm),y (mm)"
    with pytest.raises(InputError, match="already exists"):
        write_starter_manifest(data, out, can_read)
    with pytest.raises(InputError, match="no file or folder"):
        write_starter_manifest(data, tmp_path / "other.csv", lambda p: False)
