"""The Python interface (``stringcheck.check / size / review / trace_turn_off``): full signatures,
the studies' keywords and defaults, and the documented example, which runs here."""

import doctest
import inspect
import re

import pytest

import stringcheck
from stringcheck.checks.transient import trial_trace
from stringcheck.errors import StringcheckError
from stringcheck.studies.check import run_check
from stringcheck.studies.review import review as review_study
from stringcheck.studies.size import size as size_study

API = {"check": run_check, "size": size_study, "review": review_study,
       "trace_turn_off": trial_trace}


def test_the_documented_example_runs():
    # The module docstring is the example a notebook user reads: load the bundled design, check,
    # size, review with a swap, trace one trial's turn-off. Its printed values are the results.
    outcome = doctest.testmod(stringcheck, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert outcome.attempted >= 10
    assert outcome.failed == 0


def test_all_names_exist_and_the_api_is_in_it():
    assert set(API) | {"example_design", "__version__", "Design", "StringcheckError"} <= \
        set(stringcheck.__all__)
    for name in stringcheck.__all__:
        assert hasattr(stringcheck, name), name


@pytest.mark.parametrize("name", sorted(API) + ["example_design"])
def test_signatures_are_spelled_out_and_documented(name):
    function = getattr(stringcheck, name)
    parameters = inspect.signature(function).parameters.values()
    kinds = {parameter.kind for parameter in parameters}
    assert inspect.Parameter.VAR_KEYWORD not in kinds and inspect.Parameter.VAR_POSITIONAL not in kinds
    assert inspect.signature(function).return_annotation is not inspect.Signature.empty
    docstring = inspect.getdoc(function)
    for section in ("Returns",) + (("Parameters",) if parameters else ()):
        assert f"{section}\n{'-' * len(section)}" in docstring, (name, section)
    for parameter in parameters:
        assert parameter.annotation is not inspect.Parameter.empty, (name, parameter.name)
        # numpydoc: every parameter named at the start of a line of the Parameters section, alone
        # or in a comma-separated group ("trials, seed").
        assert re.search(rf"^(\w+, )*{parameter.name}(, \w+)*( : .*)?$", docstring, re.M), \
            (name, parameter.name)


@pytest.mark.parametrize("name", sorted(API))
def test_every_keyword_of_the_study_with_its_default(name):
    # The interface repeats the studies' defaults (they are imported on first call only): the
    # same keywords, each with the study's default, so that the two cannot drift apart.
    ours = inspect.signature(getattr(stringcheck, name)).parameters
    theirs = inspect.signature(API[name]).parameters
    added = {"review": {"swap", "mix"}}.get(name, set())
    assert set(ours) - added == set(theirs)
    for keyword, parameter in theirs.items():
        if parameter.default is not inspect.Parameter.empty:
            assert ours[keyword].default == parameter.default, (name, keyword)
        assert ours[keyword].kind == parameter.kind or keyword == "candidate", (name, keyword)


def test_a_path_is_loaded_and_gives_the_same_result(tmp_path):
    path = tmp_path / "demo.toml"
    design = stringcheck.example_design()
    from importlib import resources

    path.write_text((resources.files("stringcheck") / "data" / "demo.toml").read_text("utf-8"))
    by_path = stringcheck.check(path, trials=2000, seed=3)
    by_design = stringcheck.check(design, trials=2000, seed=3)
    assert by_path.verdict == by_design.verdict
    assert by_path.checks["static"].worst_ratio == by_design.checks["static"].worst_ratio


def test_review_takes_exactly_one_candidate():
    design = stringcheck.example_design()
    with pytest.raises(StringcheckError, match=r"exactly one of candidate, swap and mix \(given: "
                                               r"none\)"):
        stringcheck.review(design)
    with pytest.raises(StringcheckError, match=r"\(given: candidate, swap\)"):
        stringcheck.review(design, design, swap="1-2:FR2K")


def test_errors_name_the_python_keyword_not_the_option():
    design = stringcheck.example_design()
    with pytest.raises(StringcheckError) as caught:
        stringcheck.trace_turn_off(design, 5, trials=5)
    assert str(caught.value) == "trial must be in 0..4 (the run has 5 trials), got 5"
    with pytest.raises(StringcheckError) as caught:
        stringcheck.review(design, swap="1-99:FR2K", trials=100)
    assert str(caught.value) == ("swap='1-99:FR2K': position 99 lies outside 1..24 (the string's "
                                 "series count)")
    assert "--" not in str(caught.value)
