"""Regenerate the demo sweeps in data_demo/ and jjpattern/demo_data/ (deterministic).

The scenario is invented: chip KT-14 of the fictional Kestrel Low-Temperature
Lab, measured after its seventh cooldown. The patterns are computed here with
numpy and scipy directly, not with jjpattern, so the demo also checks the tool.

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


def main() -> None:
    for target in TARGETS:
        target.mkdir(parents=True, exist_ok=True)
        rng = np.random.default_rng(20261118)
        (target / "kt14_j03.csv").write_text(j03(rng), encoding="utf-8")
        (target / "kt14_j11.tsv").write_text(j11(rng), encoding="utf-8")
        j05(rng, target / "kt14_j05.h5")
        j07(rng, target / "kt14_j07_map.h5")
        print(f"wrote {target}")


if __name__ == "__main__":
    main()
