"""The value checks of metasim.checks and the exception family: one rule, one message, one subclass per area."""

import ast
import doctest
from pathlib import Path

import numpy as np
import pytest

import metasim
import metasim.checks
from metasim.checks import GENERATOR_SEED, is_number, known_keys, number, numbers, seed_generator, whole_number
from metasim.errors import MetasimError, ObserverError, SpecError
from metasim.observers import observer_population, physiological_observers

PACKAGE = Path(metasim.__file__).parent


def test_docstring_examples():
    result = doctest.testmod(metasim.checks)
    assert result.attempted >= 8 and result.failed == 0


def test_seed_generator_reproduces_and_records():
    rng_a, seed_a = seed_generator(7)
    rng_b, _ = seed_generator(np.int64(7))
    assert seed_a == 7 and np.array_equal(rng_a.random(5), rng_b.random(5))
    own = np.random.default_rng(3)
    rng, recorded = seed_generator(own)
    assert rng is own and recorded == GENERATOR_SEED


@pytest.mark.parametrize("seed", [-1, True, 1.5, "3", None])
def test_seed_generator_refuses(seed):
    with pytest.raises(ObserverError, match=r"seed=.* is not allowed; give an integer >= 0"):
        seed_generator(seed, error=ObserverError)


def test_number_bounds_and_messages():
    assert number(np.float64(2.0), "gamma", above=0) == 2.0
    with pytest.raises(SpecError, match=r"^f.toml: peak_nm=-3 is not allowed; need a finite number > 0$"):
        number(-3, "f.toml: peak_nm", error=SpecError, above=0)
    with pytest.raises(MetasimError, match=r"need a finite number in 1-10 degrees"):
        number(11, "field_size_deg", minimum=1, maximum=10, units="degrees")
    for bad in (float("nan"), float("inf")):
        with pytest.raises(MetasimError, match="is not allowed; need a finite number"):
            number(bad, "x")
    for bad in ("2", None, True):
        with pytest.raises(MetasimError, match="is not a number"):
            number(bad, "x")


def test_whole_number():
    assert whole_number(np.int32(4), "n", minimum=1) == 4
    with pytest.raises(MetasimError, match=r"^n=0 is not allowed; need a whole number >= 1$"):
        whole_number(0, "n", minimum=1)
    for bad in (2.0, True, "3"):
        with pytest.raises(MetasimError, match=r"^n=.* is not a whole number$"):
            whole_number(bad, "n", minimum=1)


def test_numbers_name_the_first_offending_entry():
    values = numbers([20, 30.5], "age_years", minimum=20, maximum=80)
    assert values.dtype == float and values.tolist() == [20.0, 30.5]
    with pytest.raises(MetasimError, match=r"age_years=nan is not allowed"):
        numbers([30, np.nan, 90], "age_years", minimum=20, maximum=80)
    with pytest.raises(MetasimError, match=r"need a number"):
        numbers("30", "age_years")
    with pytest.raises(MetasimError, match=r"need numbers"):
        numbers([True, False], "flags")


def test_known_keys_and_is_number():
    known_keys({"a": 1, "_path": "x"}, ("a",), "spec")
    with pytest.raises(SpecError, match=r"^spec \[vary\]: unknown key 'b'; allowed: a, c$"):
        known_keys({"a": 1, "b": 2}, ("a", "c"), "spec [vary]", error=SpecError)
    assert is_number("1e-3") and not is_number("1,5") and not is_number(None)


def test_age_out_of_range_has_one_message_on_every_path():
    messages = set()
    for call in (lambda: observer_population(3, seed=1, age_years=(30, 90)),
                 lambda: observer_population(3, seed=1, age_years=90),
                 lambda: observer_population(3, seed=1, age_years={(30, 40): 1, 90: 1}),
                 lambda: physiological_observers([30, 90])):
        with pytest.raises(ObserverError) as info:
            call()
        messages.add(str(info.value))
    assert messages == {"age_years=90 is not allowed; need 20-80 years (CIE 170-1 model; or extrapolate=True)"}


def test_no_bare_base_class_raises():
    """Every raise names the subclass of its area (metasim.errors), never MetasimError itself."""
    bare = []
    for path in PACKAGE.rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Raise) and node.exc is not None:
                target = node.exc.func if isinstance(node.exc, ast.Call) else node.exc
                if isinstance(target, ast.Name) and target.id == "MetasimError":
                    bare.append(f"{path.relative_to(PACKAGE)}:{node.lineno}")
    assert bare == []
