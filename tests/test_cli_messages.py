"""A user's mistake on the command line is one sentence naming the option and the fix,
exit status 2, no usage block and no traceback (the project's rule for user mistakes)."""

import pytest

from jjpattern import analyze
from jjpattern.cli import main
from jjpattern.demo import demo_files
from jjpattern.errors import InputError

MODELS = "rectangular, circular, two-channel, zero-pi, long-inline, long-overlap"


@pytest.fixture(scope="module")
def sweep():
    return demo_files()["kt14_j03.csv"]


def _one_sentence(capsys, argv):
    with pytest.raises(SystemExit) as exc:
        main(argv)
    out, err = capsys.readouterr()
    assert exc.value.code == 2 and out == ""
    assert err.count("\n") == 1 and "usage:" not in err and "Traceback" not in err
    return err.strip()


def test_an_unknown_model_is_one_sentence_naming_the_choices(sweep, capsys):
    err = _one_sentence(capsys, ["analyze", sweep, "--model", "fraunhofer"])
    assert err == (f"jjpattern analyze: --model: 'fraunhofer' is not a model; use auto or one "
                   f"of {MODELS} (rectangular is the uniform junction's Fraunhofer pattern).")


def test_a_misspelt_loss_names_the_nearest_choice(sweep, capsys):
    err = _one_sentence(capsys, ["analyze", sweep, "--loss", "cauchi"])
    assert err == ("jjpattern analyze: --loss: 'cauchi' is not a loss; use one of linear, "
                   "soft_l1, huber, cauchy (did you mean cauchy?).")


@pytest.mark.parametrize("argv, words", [
    (["analyze"], "jjpattern analyze: path missing; see jjpattern analyze --help."),
    (["frob"], "jjpattern: 'frob' is not a command; use one of analyze,"),
    (["catalog", "list", "junk"], "jjpattern catalog list: 'junk' is not a kind of entry; "
                                  "use one of chips, junctions, cooldowns, records."),
    (["analyze", "x.csv", "--seed", "x"], "jjpattern analyze: --seed: 'x' is not a whole "
                                          "number; see jjpattern analyze --help."),
])
def test_other_usage_mistakes_are_one_sentence(capsys, argv, words):
    assert _one_sentence(capsys, argv).startswith(words)


def test_python_names_an_unknown_model_as_a_model_and_lists_auto(sweep):
    with pytest.raises(InputError) as exc:
        analyze(sweep, model="fraunhofer")
    assert str(exc.value) == (f"unknown model 'fraunhofer': use auto or one of {MODELS} "
                              "(rectangular is the uniform junction's Fraunhofer pattern)")


def _refused(capsys, argv):
    assert main(argv) == 2
    out, err = capsys.readouterr()
    assert out == "" and err.count("\n") == 1 and "Traceback" not in err
    return err.strip()


def test_a_bad_field_unit_option_is_named_as_the_source(sweep, capsys):
    err = _refused(capsys, ["analyze", sweep, "--field-unit", "xyz"])
    assert err == "jjpattern: --field-unit 'xyz': not a field unit; use T, mT, uT, nT, G or Oe"


@pytest.mark.parametrize("option, given, column, found", [
    ("--field-unit", "G", "B (mT)", "mT"), ("--current-unit", "nA", "Ic+ (uA)", "uA")])
def test_a_unit_option_contradicting_the_header_is_refused(sweep, capsys, option, given,
                                                           column, found):
    err = _refused(capsys, ["analyze", sweep, option, given])
    assert err.endswith(f"kt14_j03.csv: column '{column}' is in {found} by the file, but "
                        f"{option} says {given}; leave {option} out to read {found}, or "
                        f"correct the unit in the file if the values are in {given}")


def test_a_unit_option_agreeing_with_the_header_is_accepted(sweep):
    # The same unit spelt another way (µ for u) is no contradiction.
    from jjpattern import load

    same = load(sweep, field_unit="mT", current_unit="µA")
    plain = load(sweep)
    assert same.branches[0].field_T[-1] == plain.branches[0].field_T[-1] == pytest.approx(5e-3)
    assert same.branches[0].ic_A.max() == plain.branches[0].ic_A.max()


def test_a_coil_constant_on_a_field_column_says_it_is_already_a_field(sweep, capsys):
    err = _refused(capsys, ["analyze", sweep, "--coil-constant", "2.5mT/A"])
    assert err.endswith("kt14_j03.csv: column 'B (mT)' is already a field (in mT); "
                        "--coil-constant is for a magnet-current axis (e.g. 'I_magnet (A)'), "
                        "so leave it out")


def test_python_names_the_keyword_and_its_value():
    from jjpattern.api import python_advice

    assert python_advice("--field-unit 'xyz': not a field unit") == \
        "field_unit='xyz': not a field unit"
