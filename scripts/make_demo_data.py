"""Regenerate the demo sweeps in data_demo/ and jjpattern/demo_data/ (deterministic).

The scenario is invented: chip KT-14 of the fictional Kestrel Low-Temperature
Lab, measured after its seventh cooldown; then, after the eighth, a grid of 24
junctions of that chip for the batch demo (chip_kt14/ with its manifest.csv).
The patterns are computed here with numpy and scipy directly, not with
jjpattern, so the demo also checks the tool.

Run: python scripts/make_demo_data.py
"""

from __future__ import annotations

import pathlib

import h5py
import numpy as np
from scipy import special

ROOT = pathlib.Path(__file__).resolve().parents[1]
TARGETS = (ROOT / "data_demo", ROOT / "jjpattern" / "demo_data")
COMMON = {
    "lab": "Kestrel Low-Temperature Lab (fictional)",
    "chip": "KT-14",
    "cooldown": "CD-07",
    "temperature_K": "1.45",
}


def rectangular(b, ic0, period, offset):
    return ic0 * np.abs(np.sinc((b - offset) / period))


def circular(b, ic0, period, offset):
    x = np.pi * (b - offset) / period
    x = np.where(x == 0, 1e-12, x)
    return ic0 * np.abs(2 * special.j1(x) / x)


def header(extra: dict) -> str:
    items = {**COMMON, **extra}
    return "".join(f"# {k}: {v}\n" for k, v in items.items())


def j03(rng) -> str:
    """Rectangular junction, both branches, a few premature switching events."""
    b_mT = np.linspace(-5.0, 5.0, 601)
    pos = rectangular(b_mT, 48.2, 0.731, 0.042) + rng.normal(0, 0.6, b_mT.size)
    neg = -(rectangular(b_mT, 47.6, 0.731, 0.047) + rng.normal(0, 0.6, b_mT.size))
    main_lobe = np.flatnonzero(np.abs(b_mT - 0.042) < 0.5)
    for k in rng.choice(main_lobe, 4, replace=False):
        pos[k] *= 0.6  # premature switching reads low
    rows = "".join(f"{b:.4f},{p:.3f},{n:.3f}\n" for b, p, n in zip(b_mT, pos, neg, strict=True))
    meta = header({"junction": "KT14-J03", "shape": "rectangular, 12 um x 12 um",
                   "length_um": "12", "width_um": "12", "barrier_nm": "1.8",
                   "electrode_nm": "300"})
    return meta + "B (mT),Ic+ (uA),Ic- (uA)\n" + rows


def j11(rng) -> str:
    """Rectangular junction with flux trapped nearby: the main lobe sits below the window."""
    b_mT = np.sort(rng.uniform(-2.0, 3.0, 700))
    ic = rectangular(b_mT, 6.4, 0.42, -2.61) + rng.normal(0, 0.012, b_mT.size)
    rows = "".join(f"{b:.5f}\t{i:.4f}\n" for b, i in zip(b_mT, ic, strict=True))
    meta = header({"junction": "KT14-J11", "note": "field cooled by mistake"})
    return meta + "field_mT\tIsw_uA\n" + rows


def j05(rng, path: pathlib.Path) -> None:
    """Circular junction in HDF5, field recorded in gauss."""
    b_G = np.linspace(-80.0, 80.0, 900)
    ic_uA = circular(b_G * 0.1, 12.4, 1.93, -0.11) + rng.normal(0, 0.15, b_G.size)
    with h5py.File(path, "w", track_order=False) as f:
        for k, v in {**COMMON, "junction": "KT14-J05", "shape": "circular, 8 um"}.items():
            f.attrs[k] = v
        f.create_dataset("field", data=np.round(b_G, 4), track_times=False).attrs["units"] = "G"
        f.create_dataset("ic", data=np.round(ic_uA, 4), track_times=False).attrs["units"] = "uA"


def j07(rng, path: pathlib.Path) -> None:
    """Raw voltage map of a hysteretic junction, bias swept 0 -> +Imax -> 0 -> -Imax -> 0."""
    b_mT = np.linspace(-2.4, 2.4, 161)
    quarter = np.linspace(0.0, 30.0, 201)  # uA
    bias = np.concatenate([quarter, quarter[-2::-1], -quarter[1:], -quarter[-2::-1]])
    ic_pos = rectangular(b_mT, 21.5, 0.58, 0.07)
    ic_neg = rectangular(b_mT, 21.1, 0.58, 0.09)
    ic = np.where(bias[None, :] >= 0, ic_pos[:, None], ic_neg[:, None])
    mag = np.abs(bias)
    outbound = np.concatenate([[True], np.diff(mag) > 0])[None, :]
    resistive = np.where(outbound, mag[None, :] > ic, mag[None, :] > 0.42 * ic)
    v_uV = np.where(resistive, 8.5 * bias[None, :], 0.0)  # Rn = 8.5 ohm: uA * ohm = uV
    v_uV = v_uV + 1.3 + rng.normal(0.0, 0.25, v_uV.shape)
    with h5py.File(path, "w", track_order=False) as f:
        meta = {**COMMON, "junction": "KT14-J07", "shape": "rectangular, 14 um x 14 um"}
        for k, v in meta.items():
            f.attrs[k] = v
        f.create_dataset("field", data=b_mT, track_times=False).attrs["units"] = "mT"
        f.create_dataset("bias", data=bias, track_times=False).attrs["units"] = "uA"
        f.create_dataset("voltage", data=v_uV.astype(np.float32), track_times=False,
                         compression="gzip", compression_opts=6).attrs["units"] = "uV"


#: The chip of the batch demo: magnetic thickness, Jc, and how much narrower than drawn
#: every junction is (the linewidth offset the chip statistics should find).
CHIP_D_M, CHIP_JC_A_M2, CHIP_DELTA_M = 236e-9, 3.3e5, 0.3e-6
CHIP_LENGTHS_UM = (4, 6, 8, 10, 14, 20)
CHIP_ROW_WIDTH_UM = {"A": None, "B": 4, "C": 10, "D": 6}  # None: square
CHIP_PITCH_MM = 1.5
#: Junctions with something wrong, and what (the rest are ordinary uniform junctions).
CHIP_DEFECTS = {
    "A06": "broken file: the instrument wrote an error message into the data",
    "B03": "edge current: the outer 10 % on each side carry 3x the current density",
    "C02": "flux trapped nearby: the pattern is shifted by 1.3 periods",
    "D05": "premature switching: Ic0 about half the chip trend, 8 % of points read low",
    "D06": "long junction: 60 um x 4 um, about 1.2 Josephson depths",
}


def edge_pattern(u, edge_fraction=0.1, edge_ratio=3.0, n=2001):
    """|integral of J(x) exp(2 pi i u x) dx| / integral J for edges carrying ``edge_ratio`` x
    the bulk density (the Dynes-Fulton integral, by the trapezoidal rule)."""
    x = np.linspace(-0.5, 0.5, n)
    j = np.where(np.abs(x) > 0.5 - edge_fraction, edge_ratio, 1.0)
    phase = np.exp(2j * np.pi * np.outer(u, x))
    return np.abs(np.trapezoid(j * phase, x, axis=1)) / np.trapezoid(j, x)


def chip_junction(rng, name: str, length_um: float, width_um: float):
    """One junction's sweep as CSV text; both polarities, |Ic + noise| as measured."""
    from scipy.constants import e, h

    length = length_um * 1e-6 - CHIP_DELTA_M
    width = width_um * 1e-6 - CHIP_DELTA_M
    period_mT = h / (2 * e) / (CHIP_D_M * length) * 1e3
    ic0_uA = CHIP_JC_A_M2 * np.exp(rng.normal(0, 0.03)) * length * width * 1e6
    offset_mT = 0.012 + rng.normal(0, 0.004)
    floor = 0.0
    if name == "C02":
        offset_mT += 1.3 * period_mT
    if name == "D05":
        ic0_uA *= 0.52
    if name == "D06":
        floor = 0.03  # a mildly long junction: nodes lifted by a few per cent
    b_mT = np.linspace(-5.5, 5.5, 301) * period_mT + (offset_mT if name == "C02" else 0.0)
    if rng.random() < 0.5:
        b_mT = b_mT[::-1]  # swept down: the file keeps the sweep order
    branches = []
    for sign in (1, -1):
        u = (b_mT - offset_mT - sign * 0.002 * period_mT) / period_mT
        shape = edge_pattern(u) if name == "B03" else np.abs(np.sinc(u))
        ic = ic0_uA * np.sqrt(shape**2 + floor**2)
        ic = np.abs(ic + rng.normal(0, 0.01 * ic0_uA + 0.02, b_mT.size))
        if name == "D05":
            low = rng.random(b_mT.size) < 0.08
            ic[low] *= rng.uniform(0.5, 0.8, low.sum())  # switched early
        branches.append(sign * ic)
    rows = [f"{b:.5f},{p:.4f},{n:.4f}\n" for b, p, n in zip(b_mT, *branches, strict=True)]
    if name == "A06":
        rows = rows[:57] + ["ERROR lock-in overload; acquisition stopped\n"]
    meta = header({"cooldown": "CD-08", "junction": f"KT14-{name}",
                   "drawn_size": f"{length_um} um x {width_um} um"})
    return meta + "B (mT),Ic+ (uA),Ic- (uA)\n" + "".join(rows)


def chip(target: pathlib.Path) -> None:
    """The batch demo: 24 junctions on a 4 x 6 grid, their files and the manifest."""
    rng = np.random.default_rng(20261208)
    folder = target / "chip_kt14"
    folder.mkdir(exist_ok=True)
    lines = ["file,junction,chip,cooldown,length (um),width (um),barrier (nm),electrode (nm),"
             "x (mm),y (mm),loss,note"]
    for r, row in enumerate(CHIP_ROW_WIDTH_UM):
        for c, length_um in enumerate(CHIP_LENGTHS_UM):
            name = f"{row}{c + 1:02d}"
            width_um = CHIP_ROW_WIDTH_UM[row] or length_um
            if name == "D06":
                length_um, width_um = 60, 4
            text = chip_junction(rng, name, length_um, width_um)
            (folder / f"kt14_{name.lower()}.csv").write_text(text, encoding="utf-8")
            loss = "cauchy" if name == "D05" else ""
            lines.append(f"kt14_{name.lower()}.csv,{name},KT-14,CD-08,{length_um},{width_um},"
                         f"1.8,300,{c * CHIP_PITCH_MM:.1f},{r * CHIP_PITCH_MM:.1f},{loss},"
                         f"\"{CHIP_DEFECTS.get(name, '')}\"")
    (folder / "manifest.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")


def main() -> None:
    for target in TARGETS:
        target.mkdir(parents=True, exist_ok=True)
        rng = np.random.default_rng(20261118)
        (target / "kt14_j03.csv").write_text(j03(rng), encoding="utf-8")
        (target / "kt14_j11.tsv").write_text(j11(rng), encoding="utf-8")
        j05(rng, target / "kt14_j05.h5")
        j07(rng, target / "kt14_j07_map.h5")
        chip(target)
        print(f"wrote {target}")


if __name__ == "__main__":
    main()
