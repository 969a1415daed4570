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
    return str(next(p for p in demo_files() if str(p).endswith("kt14_j03.csv")))


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
