"""Every registered pattern model (and a model added in one file) goes through the whole
pipeline: analyze, the result document, and a report with its methods paragraph."""

import json
import re

import example_model
import numpy as np
import pytest
from test_models_example import measured_sweep

from jjpattern.cli import main
from jjpattern.physics.models import get_model, model_names, registered
from jjpattern.pipeline import analyze
from jjpattern.report.bundle import write_report
from jjpattern.result import Result
from jjpattern.synthetic import ideal


def _write_sweep(path, field, ic):
    # Field swept down in file order; Ic read as a magnitude (noise folds at the nodes).
    rows = "\n".join(f"{b * 1e3:.6f},{i * 1e6:.5f}" for b, i in zip(field, ic, strict=True))
    path.write_text("# junction: KT14-J21\nB (mT),Ic (uA)\n" + rows + "\n")


def _check_report(result, out):
    paths = write_report(result, str(out), ["test"])
    methods = (out / "methods.txt").read_text()
    spec = get_model(result.fits[0].model)
    assert spec.methods_text in methods
    for citation in spec.references.values():
        assert citation in methods
    # References are numbered in the order the text cites them.
    numbers = [int(n) for n in re.findall(r"\[(\d+)\]", methods.split("References")[0])]
    assert numbers[0] == 1 and max(numbers) == len(set(numbers))
    assert Result.read(paths["result.json"]).to_json() == result.to_json()


@pytest.mark.parametrize("name", model_names())
def test_every_registered_model_through_analyze_and_report(name, tmp_path):
    rng = np.random.default_rng(sum(map(ord, name)))
    period, offset, ic0 = 0.8e-3, 0.05e-3, 20e-6
    field = np.linspace(6.3 * period, -6.3 * period, 500) + offset
    extra = {"asymmetry": 0.3} if name == "two-channel" else {}
    ic = np.abs(ideal(field, name, ic0, period, offset, **extra)
                + rng.normal(0, 0.01 * ic0, field.size))
    src = tmp_path / "sweep.csv"
    _write_sweep(src, field, ic)
    result = analyze(src, model=name)
    fit = result.fits[0]
    assert fit.model == name
    assert fit.period_T == pytest.approx(period, rel=0.01)
    _check_report(result, tmp_path / "report")


def test_a_model_added_in_one_file_goes_through_analyze_and_report(tmp_path):
    rng = np.random.default_rng(41)
    field, positive, negative = measured_sweep(rng, points=500)
    src = tmp_path / "sweep.csv"
    rows = "\n".join(f"{b * 1e3:.6f},{p * 1e6:.5f},{n * 1e6:.5f}"
                     for b, p, n in zip(field, positive, negative, strict=True))
    src.write_text("B (mT),Ic+ (uA),Ic- (uA)\n" + rows + "\n")
    with registered(example_model.MODEL):
        result = analyze(src, model="cosine-profile")
        assert [f.model for f in result.fits] == ["cosine-profile"] * 2
        _check_report(result, tmp_path / "report")
        assert main(["analyze", str(src), "--model", "cosine-profile", "--json"]) == 0


def test_extra_parameters_reach_the_document(tmp_path):
    rng = np.random.default_rng(3)
    period = 0.5e-3
    field = np.linspace(-4.2 * period, 4.2 * period, 400)
    ic = np.abs(ideal(field, "two-channel", 10e-6, period, 0.0, asymmetry=0.25)
                + rng.normal(0, 0.1e-6, field.size))
    src = tmp_path / "squid.csv"
    _write_sweep(src, field, ic)
    doc = json.loads(analyze(src, model="two-channel").to_json())
    fit = doc["fits"][0]
    assert abs(fit["extra_params"]["asymmetry"]) == pytest.approx(0.25, abs=0.02)
    assert fit["extra_stderr"]["asymmetry"] > 0
