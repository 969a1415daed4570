"""The pattern-model registry: specs, their checks, temporary registration, the views."""

import subprocess
import sys
import threading

import example_model
import numpy as np
import pytest

from jjpattern.errors import InputError
from jjpattern.fit.models import MODELS, PatternModel, pattern_model
from jjpattern.physics import patterns
from jjpattern.physics.models import (
    ExtraParameter,
    PatternModelSpec,
    all_references,
    get_model,
    model_names,
    registered,
)
from jjpattern.physics.models.check import check_model
from jjpattern.synthetic import ideal

BUILT_IN = ("rectangular", "circular", "two-channel", "zero-pi", "long-inline",
            "long-overlap")


def _spec(**changes):
    """The rectangular model with some fields replaced."""
    fields = {"name": "test-shape", "formula": get_model("rectangular").formula,
              "node_flux": get_model("rectangular").node_flux, "description": "a test",
              "methods_text": "a test pattern"}
    fields.update(changes)
    return PatternModelSpec(**fields)


def test_built_in_models_in_registry_order():
    assert model_names() == BUILT_IN
    assert [get_model(n).periodic for n in BUILT_IN] == [False, False, True, False, False,
                                                          False]


@pytest.mark.parametrize("name", BUILT_IN)
def test_every_registered_model_passes_the_self_check(name):
    assert check_model(get_model(name)) == []


def test_unknown_name_lists_the_known_ones():
    with pytest.raises(InputError, match="unknown geometry 'oval'; use one of rectangular, "
                                         "circular, two-channel, zero-pi, long-inline, "
                                         "long-overlap"):
        get_model("oval")


def test_listing_models_loads_neither_numpy_nor_scipy():
    # The command line builds its --geometry choices and help from the registry.
    code = ("import sys; from jjpattern.physics.models import get_model, model_names;"
            "[get_model(n).description for n in model_names()];"
            "print(sorted(m for m in ('numpy', 'scipy', 'lmfit') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"


def test_references_agree_between_models_and_with_the_report():
    refs = all_references()
    assert set(refs) == {"rowell", "barone", "jaklevic", "df", "vanharlingen", "owen"}
    from jjpattern.report import methods

    shared = set(refs) & set(getattr(methods, "REFERENCES", {}))
    assert all(refs[k] == methods.REFERENCES[k] for k in shared)


def test_temporary_model_is_seen_by_every_view_and_only_inside_the_block():
    spec = example_model.MODEL
    with registered(spec) as same:
        assert same is spec and model_names() == BUILT_IN + ("cosine-profile",)
        assert patterns.PATTERNS["cosine-profile"] is spec.formula
        assert np.array_equal(patterns.node_flux("cosine-profile", 2), [1.5, 2.5])
        assert "cosine-profile" not in patterns.PERIODIC
        assert isinstance(MODELS["cosine-profile"](), PatternModel)
        b = np.linspace(-3e-3, 3e-3, 101)
        assert np.array_equal(ideal(b, "cosine-profile", 2e-6, 1e-3, 0.0),
                              spec.formula(b, 2e-6, 1e-3, 0.0))
    for view in (patterns.PATTERNS, MODELS):
        assert list(view) == list(BUILT_IN) and "cosine-profile" not in view
        with pytest.raises(KeyError):
            view["cosine-profile"]
    assert set(patterns.PERIODIC) == {"two-channel"} and len(patterns.PERIODIC) == 1
    with pytest.raises(InputError):
        ideal(np.zeros(3), "cosine-profile", 1.0, 1.0, 0.0)


def test_registration_is_undone_on_error_and_invisible_to_other_threads():
    seen = []
    with pytest.raises(RuntimeError), registered(example_model.MODEL):
        worker = threading.Thread(target=lambda: seen.append(model_names()))
        worker.start()
        worker.join()
        raise RuntimeError
    assert seen == [BUILT_IN]
    assert model_names() == BUILT_IN


def test_names_cannot_be_registered_twice():
    with pytest.raises(ValueError, match="already registered"), registered(
            _spec(name="circular")):
        pass
    with registered(_spec()), pytest.raises(ValueError, match="already registered"), \
            registered(_spec()):
        pass
    assert model_names() == BUILT_IN


def _two_args(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0, **extra):
    return field_T


def _hidden(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0, tilt=0.0):
    return field_T


def _no_default(field_T, ic0_A, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    return field_T


@pytest.mark.parametrize(("changes", "message"), [
    ({"name": "Two Channel"}, "lower case"),
    ({"description": "two\nlines"}, "description must be one"),
    ({"formula": _two_args}, r"\*\*kwargs"),
    ({"formula": _hidden}, "'tilt' is not a declared extra"),
    ({"formula": _no_default}, "'ic0_A' needs a numeric default"),
    ({"extra": (ExtraParameter("skew", 0.0),)}, "no keyword argument 'skew'"),
    ({"extra": (ExtraParameter("floor_A", 0.0),)}, "outside"),
    ({"references": {"x": ""}}, "references"),
])
def test_spec_structure_is_checked_when_made(changes, message):
    with pytest.raises(ValueError, match=message):
        _spec(**changes)


def _shifted(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    return get_model("rectangular").formula(field_T, ic0_A, period_T, field_offset_T + 0.1,
                                            floor_A)


def _linear_floor(field_T, ic0_A=1.0, period_T=1.0, field_offset_T=0.0, floor_A=0.0):
    return get_model("rectangular").formula(field_T, ic0_A, period_T, field_offset_T) + floor_A


@pytest.mark.parametrize(("changes", "message"), [
    ({"formula": _shifted}, "peak at ic0_A"),
    ({"formula": _linear_floor}, "quadrature"),
    ({"node_flux": lambda n: np.arange(1, n + 1) + 0.5}, "vanish at the nodes"),
    ({"node_flux": lambda n: np.arange(2, n + 2.0)}, "node between 0 and 2"),
    ({"node_flux": lambda n: np.ones(n)}, "increasing"),
    ({"periodic": True}, "repeat"),
    ({"unit_shape": lambda u: np.abs(np.sinc(u / 2))}, "unit_shape"),
])
def test_self_check_catches_broken_models(changes, message):
    problems = check_model(_spec(**changes))
    assert any(message in p for p in problems), problems


def test_decay_is_required_of_patterns_that_are_not_periodic():
    two = get_model("two-channel")
    problems = check_model(_spec(formula=two.formula, node_flux=two.node_flux,
                                 extra=two.extra))
    assert any("decay" in p for p in problems), problems


def test_fit_model_is_built_from_the_spec():
    model = pattern_model("two-channel")
    assert model.geometry == "two-channel"
    assert model.param_names == ["ic0_A", "period_T", "field_offset_T", "floor_A", "asymmetry"]
    params = model.make_params()
    assert params["asymmetry"].value == 0.1 and params["floor_A"].vary is False
    plain = PatternModel(_spec(formula=example_model.formula, node_flux=example_model.node_flux))
    assert plain.param_names == ["ic0_A", "period_T", "field_offset_T", "floor_A"]
    assert plain.make_params()["effective_area_m2"].expr == "phi0_Wb / abs(period_T)"
    with pytest.raises(InputError):
        pattern_model("oval")


def test_extra_parameter_bounds_reach_lmfit():
    two = get_model("two-channel")
    spec = _spec(formula=two.formula, node_flux=two.node_flux, periodic=True,
                 extra=(ExtraParameter("asymmetry", 0.2, min=-1.0, max=1.0),))
    p = PatternModel(spec).make_params()["asymmetry"]
    assert (p.value, p.min, p.max) == (0.2, -1.0, 1.0)


def test_fit_models_pickle_for_worker_processes():
    import pickle

    model = pickle.loads(pickle.dumps(pattern_model("two-channel")))
    assert model.geometry == "two-channel" and model.spec.references["jaklevic"]
    u = np.array([0.0, 0.25, 0.5])
    assert np.allclose(model.unit_shape(u), [1.0, np.sqrt(0.5), 0.0], atol=1e-15)
