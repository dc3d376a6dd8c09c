"""Checks of input values: the one home of the rules every layer applies where a value enters.

A value is checked once, where it enters the library (a public function, a file or spec reader);
the functions it is handed to afterwards take it as checked. Each check raises the
:class:`~metasim.errors.MetasimError` subclass of the caller's area, passed as ``error=`` (an
observer parameter raises :class:`~metasim.errors.ObserverError`, a spec value
:class:`~metasim.errors.SpecError`, ...), with a one-line message naming the value, the offending
entry and what is allowed::

    age_years=90 is not allowed; need 20-80 years (CIE 170-1 model; or extrapolate=True)

The checks
----------
:func:`seed_generator`
    A seed (integer >= 0) or a ``numpy.random.Generator`` → the Generator and what to record;
    :func:`seed_attributes` → the result attributes that record it.
:func:`number`
    One real number (not a bool), finite, optionally bounded → float.
:func:`whole_number`
    One integer (not a bool), optionally bounded → int.
:func:`numbers`
    Array-like real numbers, every entry finite and optionally bounded → float array.
:func:`known_keys`
    A table (dict, e.g. parsed TOML) holds only the allowed keys.
:func:`current_spelling` / :func:`renamed_keywords`
    An old name of a value / of a function's keyword still works for one release, with a warning
    naming the new one.
:func:`is_number`
    Text that reads as a number (for file readers naming the bad cell).

Bounds: ``minimum`` / ``maximum`` are inclusive, ``above`` is an exclusive lower bound. ``units``
is printed after the bounds; ``note`` is added in parentheses at the end of the message.

Examples
--------
>>> from metasim.errors import ObserverError
>>> number(2.5, "field_size_deg", error=ObserverError, minimum=1, maximum=10)
2.5
>>> number(0, "width_nm", error=ObserverError, above=0, units="nm")
Traceback (most recent call last):
    ...
metasim.errors.ObserverError: width_nm=0 is not allowed; need a finite number > 0 nm
>>> rng, recorded = seed_generator(7, error=ObserverError)
>>> recorded
7
"""

from __future__ import annotations

import json
import functools
import math
import warnings
from numbers import Integral, Real
from typing import Iterable, Mapping

import numpy as np

from metasim.errors import MetasimError, DeprecatedNameWarning

#: What is recorded as the seed of a draw made with a caller's own ``numpy.random.Generator``.
GENERATOR_SEED = "numpy Generator"


def seed_generator(seed, *, error: type[MetasimError] = MetasimError) -> tuple[np.random.Generator, int | str]:
    """The random generator of a seed, and the seed to record in a result's attributes.

    Parameters
    ----------
    seed : int or numpy.random.Generator
        An integer >= 0 (``numpy.random.default_rng(seed)``) or a Generator used as it is.
    error : MetasimError subclass
        Raised for anything else.

    Returns
    -------
    (numpy.random.Generator, int or str)
        The generator and the seed as an ``int``, or :data:`GENERATOR_SEED` for a Generator.

    Examples
    --------
    >>> seed_generator(-1)
    Traceback (most recent call last):
        ...
    metasim.errors.MetasimError: seed=-1 is not allowed; give an integer >= 0 or a numpy.random.Generator
    """
    if isinstance(seed, np.random.Generator):
        return seed, GENERATOR_SEED
    if isinstance(seed, bool) or not isinstance(seed, Integral) or seed < 0:
        raise error(f"seed={seed!r} is not allowed; give an integer >= 0 or a numpy.random.Generator")
    return np.random.default_rng(int(seed)), int(seed)


def seed_attributes(rng: np.random.Generator, recorded: int | str) -> dict:
    """The attributes recording a draw's seed: ``seed`` (as :func:`seed_generator` returned it) and,
    for a caller's own Generator, ``generator_state`` (its bit generator's state before the draws,
    JSON), so the draw can be repeated.

    Parameters
    ----------
    rng : numpy.random.Generator
        The generator, before any draw.
    recorded : int or str
        The seed as :func:`seed_generator` returned it.

    Returns
    -------
    dict
        ``seed`` and, for a caller's own Generator, ``generator_state``.

    Examples
    --------
    >>> from metasim.checks import seed_attributes, seed_generator
    >>> seed_attributes(*seed_generator(7))
    {'seed': 7}
    """
    if recorded == GENERATOR_SEED:
        return {"seed": recorded, "generator_state": json.dumps(rng.bit_generator.state, default=int)}
    return {"seed": recorded}


def _bounds(minimum, maximum, above, units: str) -> str:
    """The allowed interval as words: ``20-80 years``, ``> 0 nm``, ``>= 1``."""
    if minimum is not None and maximum is not None:
        text = f"{minimum:g}-{maximum:g}"
    else:
        parts = []
        if above is not None:
            parts.append(f"> {above:g}")
        if minimum is not None:
            parts.append(f">= {minimum:g}")
        if maximum is not None:
            parts.append(f"<= {maximum:g}")
        text = " and ".join(parts)
    return f"{text} {units}".strip()


def _message(name: str, shown: str, need: str, note: str, sep: str = "=") -> str:
    return f"{name}{sep}{shown} is not allowed; need {need}" + (f" ({note})" if note else "")


def _outside(value: float, minimum, maximum, above) -> bool:
    return ((minimum is not None and value < minimum) or (maximum is not None and value > maximum)
            or (above is not None and value <= above))


def number(value, name: str, *, error: type[MetasimError] = MetasimError, minimum: float | None = None,
           maximum: float | None = None, above: float | None = None, units: str = "", note: str = "",
           sep: str = "=") -> float:
    """One finite real number (a bool is refused), inside the bounds given; returned as a float.

    ``sep`` joins the name and the value in the message (``" = "`` for keys of a TOML file).

    Parameters
    ----------
    value
        The value given.
    name : str
        How the message names it.
    error : type
        The :class:`~metasim.errors.MetasimError` subclass to raise.
    minimum, maximum, above : float, optional
        Bounds: ``>= minimum``, ``<= maximum``, ``> above``.
    units, note : str
        Said in the message after the allowed range.
    sep : str
        Joins the name and the value in the message.

    Returns
    -------
    float
        The value.

    Raises
    ------
    error
        Not a finite real number, or outside the bounds.

    Examples
    --------
    >>> number(True, "gamma")
    Traceback (most recent call last):
        ...
    metasim.errors.MetasimError: gamma=True is not a number
    >>> number(float("nan"), "spec.toml: peak_nm", above=0, sep=" = ")
    Traceback (most recent call last):
        ...
    metasim.errors.MetasimError: spec.toml: peak_nm = nan is not allowed; need a finite number > 0
    """
    if isinstance(value, bool) or not isinstance(value, Real):
        raise error(f"{name}{sep}{value!r} is not a number" + (f" ({note})" if note else ""))
    bounds = _bounds(minimum, maximum, above, units)
    need = "a finite number" if not bounds else (
        f"a finite number in {bounds}" if minimum is not None and maximum is not None else f"a finite number {bounds}")
    if not math.isfinite(value) or _outside(value, minimum, maximum, above):
        raise error(_message(name, repr(value), need, note, sep))
    return float(value)


def whole_number(value, name: str, *, error: type[MetasimError] = MetasimError, minimum: int | None = None,
                 maximum: int | None = None, note: str = "", sep: str = "=") -> int:
    """One integer (a bool is refused; ``numpy`` integers are accepted), inside the bounds given.

    Parameters
    ----------
    value, name, error, note, sep
        As for :func:`number`.
    minimum, maximum : int, optional
        Bounds, inclusive.

    Returns
    -------
    int
        The value.

    Raises
    ------
    error
        Not an integer, or outside the bounds.

    Examples
    --------
    >>> whole_number(3, "k", minimum=1, maximum=2, note="at most the population size")
    Traceback (most recent call last):
        ...
    metasim.errors.MetasimError: k=3 is not allowed; need a whole number 1-2 (at most the population size)
    >>> whole_number(2.5, "chunk_size", sep=" = ")
    Traceback (most recent call last):
        ...
    metasim.errors.MetasimError: chunk_size = 2.5 is not a whole number
    """
    if isinstance(value, bool) or not isinstance(value, Integral):
        raise error(f"{name}{sep}{value!r} is not a whole number" + (f" ({note})" if note else ""))
    bounds = _bounds(minimum, maximum, None, "")
    if _outside(value, minimum, maximum, None):
        raise error(_message(name, repr(value), f"a whole number {bounds}".strip(), note, sep))
    return int(value)


def numbers(values, name: str, *, error: type[MetasimError] = MetasimError, minimum: float | None = None,
            maximum: float | None = None, above: float | None = None, units: str = "", note: str = "") -> np.ndarray:
    """Real numbers (a number or array-like), every entry finite and inside the bounds given.

    Returns them as a float64 array of at least one dimension. The message names the first
    offending entry.

    Parameters
    ----------
    values
        A number or array-like.
    name, error, minimum, maximum, above, units, note
        As for :func:`number`.

    Returns
    -------
    ndarray
        float64, at least one dimension.

    Raises
    ------
    error
        An entry that is not a finite real number or lies outside the bounds (the first is named).

    Examples
    --------
    >>> numbers([30, 90], "age_years", minimum=20, maximum=80, units="years")
    Traceback (most recent call last):
        ...
    metasim.errors.MetasimError: age_years=90 is not allowed; need 20-80 years
    """
    array = np.asarray(values)
    bounds = _bounds(minimum, maximum, above, units)
    need = f"finite numbers {bounds}".strip() if array.ndim else f"a finite number {bounds}".strip()
    if minimum is not None and maximum is not None:
        need = bounds
    if array.dtype.kind not in "iuf":
        raise error(_message(name, repr(values), "numbers" if array.ndim else "a number", note))
    array = np.atleast_1d(array.astype(float, copy=False))
    bad = ~np.isfinite(array)
    if minimum is not None:
        bad |= array < minimum
    if maximum is not None:
        bad |= array > maximum
    if above is not None:
        bad |= array <= above
    if bad.any():
        raise error(_message(name, f"{array.flat[int(np.argmax(bad))]:g}", need, note))
    return array


def known_keys(table: Mapping, allowed: Iterable[str], where: str, *,
               error: type[MetasimError] = MetasimError) -> None:
    """Refuse a key of ``table`` that is not in ``allowed`` (keys starting with ``_`` are internal).

    Parameters
    ----------
    table : mapping
        The keys to check (a TOML table, a dict of options).
    allowed : iterable of str
        The keys allowed.
    where : str
        How the message names the table (file and table).
    error : type
        The :class:`~metasim.errors.MetasimError` subclass to raise.

    Returns
    -------
    None

    Raises
    ------
    error
        A key not in ``allowed``, named with the allowed ones.

    Examples
    --------
    >>> known_keys({"peak_nm": 450, "fwhm": 20}, ("peak_nm", "fwhm_nm"), "spec.toml [[primary]] B")
    Traceback (most recent call last):
        ...
    metasim.errors.MetasimError: spec.toml [[primary]] B: unknown key 'fwhm'; allowed: peak_nm, fwhm_nm
    """
    allowed = tuple(allowed)
    extra = [key for key in table if key not in allowed and not str(key).startswith("_")]
    if extra:
        raise error(f"{where}: unknown key {extra[0]!r}; allowed: {', '.join(allowed)}")


def warn_renamed(old: str, new: str, category=None, *, stacklevel: int = 2) -> None:
    """Warn that ``old`` is renamed ``new`` and that the old name works until the next release.

    The one wording of every rename notice (keywords, values, functions, spec entries).

    Parameters
    ----------
    old, new : str
        The old and the new name as the reader should see them (quoted or with ``()`` as fits).
    category : type of Warning, optional
        Default :class:`~metasim.errors.RenamedWarning`.
    stacklevel : int
        As for :func:`warnings.warn`, counted from the caller of this function.

    Returns
    -------
    None

    Examples
    --------
    >>> import warnings
    >>> with warnings.catch_warnings(record=True) as seen:
    ...     warnings.simplefilter("always")
    ...     warn_renamed("strategy 'population'", "'least_mismatch'")
    >>> str(seen[0].message)
    "strategy 'population' is renamed 'least_mismatch'; the old name works until the next release"
    """
    if category is None:
        from metasim.errors import RenamedWarning

        category = RenamedWarning
    warnings.warn(f"{old} is renamed {new}; the old name works until the next release", category,
                  stacklevel=stacklevel + 1)


def current_spelling(value, renamed: Mapping, what: str, *, stacklevel: int = 3):
    """The current name of ``value``: an old spelling in ``renamed`` (old → new) still works for one
    release, with a :class:`~metasim.errors.RenamedWarning` naming the new one; anything else as given.

    Parameters
    ----------
    value : object
        The value as given (a name such as a strategy or a reference; other values pass through).
    renamed : Mapping
        Old name → new name.
    what : str
        What the value is, for the warning ("strategy", "reference").
    stacklevel : int
        Passed to :func:`warnings.warn`: the frame the warning points to.

    Returns
    -------
    object
        The new name for an old one, else ``value`` itself.

    Examples
    --------
    >>> import warnings
    >>> with warnings.catch_warnings(record=True) as seen:
    ...     warnings.simplefilter("always")
    ...     current_spelling("population", {"population": "least_mismatch"}, "strategy")
    'least_mismatch'
    >>> str(seen[0].message)
    "strategy 'population' is renamed 'least_mismatch'; the old name works until the next release"
    """
    if isinstance(value, str) and value in renamed:
        warn_renamed(f"{what} {value!r}", repr(renamed[value]), stacklevel=stacklevel)
        return renamed[value]
    return value


def renamed_keywords(**old_to_new: str):
    """Decorator: the function also takes each old keyword name (``old=new``) for one release, with a
    :class:`~metasim.errors.DeprecatedNameWarning` (a ``DeprecationWarning``) naming the new one.

    Parameters
    ----------
    **old_to_new : str
        Old keyword → new keyword of the decorated function.

    Returns
    -------
    callable
        The decorator; the decorated function keeps its name, signature and docstring.

    Raises
    ------
    TypeError
        From the decorated function, when one keyword is given by both its old and its new name.

    Examples
    --------
    >>> import warnings
    >>> @renamed_keywords(radiance="relative_power")
    ... def scaled(x, *, relative_power=1.0):
    ...     return x * relative_power
    >>> with warnings.catch_warnings(record=True) as seen:
    ...     warnings.simplefilter("always")
    ...     scaled(2.0, radiance=3.0)
    6.0
    >>> str(seen[0].message)
    "scaled(): keyword 'radiance' is renamed 'relative_power'; the old name works until the next release"
    """
    def decorate(function):
        @functools.wraps(function)
        def call(*args, **kwargs):
            for old, new in old_to_new.items():
                if old not in kwargs:
                    continue
                if new in kwargs:
                    raise TypeError(f"{function.__qualname__}(): both {old}= and {new}= given; {old!r} is the old "
                                    f"name of {new!r}, keep one")
                kwargs[new] = kwargs.pop(old)
                warn_renamed(f"{function.__qualname__}(): keyword {old!r}", repr(new), DeprecatedNameWarning)
            return function(*args, **kwargs)

        call.renamed_keywords = dict(old_to_new)
        return call

    return decorate


def is_number(text: str) -> bool:
    """True when ``float(text)`` reads ``text`` (file readers use it to name the bad cell).

    Parameters
    ----------
    text : str
        A cell or option as read.

    Returns
    -------
    bool
        Whether ``float(text)`` reads it.

    Examples
    --------
    >>> is_number(" 2.5e3 "), is_number("x")
    (True, False)
    """
    try:
        float(text)
    except (TypeError, ValueError):
        return False
    return True


__all__ = ["GENERATOR_SEED", "seed_generator", "seed_attributes", "number", "whole_number", "numbers", "known_keys", "current_spelling",
           "renamed_keywords", "is_number"]
