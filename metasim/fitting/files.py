"""CSV imports of the two forms of colour-matching data (one row per match).

**Colour-matching functions** (:func:`read_matching_functions_csv`)::

    # primary_wavelengths_nm: 645.16, 526.32, 444.44
    subject,test_wavelength_nm,R,G,B,field_size_deg,age_years
    s01,400,0.0124,-0.0031,0.2893,10,24
    s01,410,...

**Matching sessions** (:func:`read_session_csv`)::

    subject,stimulus,R,G,B,field_size_deg,age_years
    s01,skin,0.412,0.305,0.198,2,51
    s01,skin,0.418,0.301,0.201,2,51      (a second row for the same stimulus: a repeat)

Rules for both: lines starting with ``#`` are comments (the comment
``# primary_wavelengths_nm: a, b, c`` names monochromatic primaries); the header names the columns;
``subject`` and the second key column (``test_wavelength_nm`` or ``stimulus``) are required; every
other column except the optional ``field_size_deg`` and ``age_years`` is a primary, exactly three,
in order; an empty cell or ``nan`` is a missing value; rows of the same subject and stimulus are
repeats; ``field_size_deg`` and ``age_years`` must be constant within a subject (empty age =
unknown). Without those columns the keyword arguments apply to every subject.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np
import xarray as xr

from metasim.errors import FileFormatError, FittingError
from metasim.fitting.forms import colour_matching_data, matching_session_data
from metasim.io import read_csv_rows
from metasim.spectra import read_spectra_csv

SUBJECT_COLUMNS = ("field_size_deg", "age_years")
PRIMARIES_NOTE = "primary_wavelengths_nm:"


def _number(text: str, where: str) -> float:
    text = text.strip()
    if text == "" or text.lower() == "nan":
        return math.nan
    try:
        value = float(text)
    except ValueError:
        raise FileFormatError(f"{where}: {text!r} is not a number") from None
    if math.isinf(value):
        raise FileFormatError(f"{where}: {text!r}; values must be finite (empty or nan for missing)")
    return value


def _read_rows(path: Path, key: str):
    """Header, notes and data rows (line number, cells) of a matching CSV file."""
    notes, records = read_csv_rows(path, "matching CSV file")
    header, rows = None, []
    for line, record in records:
        if header is None:
            header = [c.strip() for c in record]
            if header[:2] != ["subject", key]:
                raise FileFormatError(f"{path}:{line}: header {header!r}; the first columns must be 'subject,{key}'")
            primaries = [c for c in header[2:] if c not in SUBJECT_COLUMNS]
            if len(primaries) != 3 or len(set(header)) != len(header):
                raise FileFormatError(f"{path}:{line}: header names primaries {primaries!r}; need exactly three "
                                      f"distinct primary columns after 'subject,{key}'")
            continue
        if len(record) != len(header):
            raise FileFormatError(f"{path}:{line}: {len(record)} cells, the header has {len(header)}")
        rows.append((line, [c.strip() for c in record]))
    if header is None or not rows:
        raise FileFormatError(f"{path}: no data rows (expected a header 'subject,{key},...' and one row per match)")
    return header, notes, rows


def _table(path, key: str, key_is_number: bool):
    """(subjects, stimuli, values (n, S, R, 3), field (n,) or None, age (n,) or None, primaries, notes)."""
    path = Path(path)
    header, notes, rows = _read_rows(path, key)
    primaries = [c for c in header[2:] if c not in SUBJECT_COLUMNS]
    columns = {name: header.index(name) for name in header}
    subjects, stimuli, per_subject = [], [], {}
    cells: dict = {}
    for line, record in rows:
        where = f"{path}:{line}"
        subject = record[0]
        if not subject:
            raise FileFormatError(f"{where}: empty subject")
        stimulus = _number(record[1], where) if key_is_number else record[1]
        if key_is_number and math.isnan(stimulus):
            raise FileFormatError(f"{where}: {key} is missing")
        if subject not in per_subject:
            subjects.append(subject)
            per_subject[subject] = {}
        if stimulus not in stimuli:
            stimuli.append(stimulus)
        for name in SUBJECT_COLUMNS:
            if name in columns:
                value = _number(record[columns[name]], where)
                previous = per_subject[subject].setdefault(name, value)
                if not (previous == value or (math.isnan(previous) and math.isnan(value))):
                    raise FileFormatError(f"{where}: {name} {value:g} differs from {previous:g} given before for "
                                          f"subject {subject}; it must be constant per subject")
        values = [_number(record[columns[p]], where) for p in primaries]
        cells.setdefault((subject, stimulus), []).append(values)
    if key_is_number:
        stimuli = sorted(stimuli)
    repeats = max(len(v) for v in cells.values())
    array = np.full((len(subjects), len(stimuli), repeats, 3), np.nan)
    s_index = {s: i for i, s in enumerate(subjects)}
    t_index = {t: j for j, t in enumerate(stimuli)}
    for (subject, stimulus), values in cells.items():
        array[s_index[subject], t_index[stimulus], :len(values)] = values
    extra = {name: (np.array([per_subject[s][name] for s in subjects]) if name in columns else None)
             for name in SUBJECT_COLUMNS}
    return subjects, stimuli, array, extra["field_size_deg"], extra["age_years"], primaries, notes


def _primaries_from_notes(notes: list[str], path) -> list[float] | None:
    for note in notes:
        if note.lower().startswith(PRIMARIES_NOTE):
            try:
                values = [float(v) for v in note[len(PRIMARIES_NOTE):].split(",")]
            except ValueError:
                raise FileFormatError(f"{path}: comment {note!r}; give three wavelengths in nm") from None
            if len(values) != 3:
                raise FileFormatError(f"{path}: comment {note!r} names {len(values)} primaries; need 3")
            return values
    return None


def _field_and_age(path, field, age, field_size_deg, age_years):
    return (field if field is not None else field_size_deg), (age if age is not None else age_years)


def read_matching_functions_csv(path: str | os.PathLike, *, primaries=None, field_size_deg=2.0,
                                age_years=None) -> xr.Dataset:
    """Individual colour-matching functions from a CSV file (module docstring for the layout).

    ``primaries``: three wavelengths (nm) or a DataArray of three spectra, or a path to a spectra
    CSV (:func:`metasim.read_spectra_csv`); default the file's ``# primary_wavelengths_nm:`` comment.
    ``field_size_deg``, ``age_years``: for subjects without those columns.

    Parameters
    ----------
    path : str or os.PathLike
        The CSV file (UTF-8).
    primaries : sequence of 3 floats, xarray.DataArray (primary, wavelength), str or os.PathLike, optional
        Monochromatic primary wavelengths in nm, primary spectra, or a spectra CSV file.
    field_size_deg : float or array_like
        Field size in degrees (1-10), one or one per subject.
    age_years : float or array_like, optional
        Age in years (20-80), one or one per subject; None: unknown.

    Returns
    -------
    xarray.Dataset
        Colour-matching functions (:func:`metasim.colour_matching_data`): ``amount`` (observer,
        stimulus, repeat, primary) in primary-normalised energy units, the attribute ``source``
        naming the file.

    Raises
    ------
    FileFormatError
        A wrong header, a row with another number of cells, a cell that is not a number, a missing
        test wavelength, a per-subject value that changes, or an unusable primaries comment (naming
        the file and line).
    FittingError
        No primaries, or data the form refuses (:func:`check_matching_data`).

    References
    ----------
    CIE 15:2018 Colorimetry, 4th edition (colour matching with three primaries).

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> from metasim.fitting import read_matching_functions_csv
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = Path(folder) / "matches.csv"
    ...     _ = path.write_text("# primary_wavelengths_nm: 645.16, 526.32, 444.44\\n"
    ...                         "subject,test_wavelength_nm,R,G,B,age_years\\n"
    ...                         "s01,450,0.02,0.05,0.90,30\\ns01,550,0.45,0.60,0.01,30\\n"
    ...                         "s02,450,0.03,0.05,0.88,\\ns02,550,0.44,0.61,0.01,\\n")
    ...     data = read_matching_functions_csv(path)
    >>> dict(data.sizes), data["age_years"].values.tolist()
    ({'observer': 2, 'stimulus': 2, 'repeat': 1, 'primary': 3}, [30.0, nan])
    """
    subjects, stimuli, array, field, age, labels, notes = _table(path, "test_wavelength_nm", True)
    if primaries is None:
        primaries = _primaries_from_notes(notes, path)
        if primaries is None:
            raise FittingError(f"{path}: amounts with no primaries; add the comment '# primary_wavelengths_nm: a, b, c' "
                               "or give the primaries (wavelengths or spectra)")
    elif isinstance(primaries, (str, os.PathLike)):
        primaries = read_spectra_csv(primaries, dim="primary")
    field, age = _field_and_age(path, field, age, field_size_deg, age_years)
    ds = colour_matching_data(array, test_wavelengths=stimuli, primaries=primaries,
                              primary_labels=None if isinstance(primaries, xr.DataArray) else labels,
                              subjects=subjects, field_size_deg=field, age_years=age)
    ds.attrs["source"] = str(path)
    return ds


def read_session_csv(path: str | os.PathLike, *, references, display, field_size_deg=2.0, age_years=None) -> xr.Dataset:
    """Matching sessions from a CSV file of settings (module docstring for the layout).

    ``references``: DataArray (stimulus × wavelength) or a spectra CSV path whose columns are named
    like the file's stimuli; ``display``: a metasim Display, primary spectra, or a spectra CSV path
    whose three columns are named like the file's primary columns.

    Parameters
    ----------
    path : str or os.PathLike
        The CSV file (UTF-8): ``subject,stimulus,<three primaries>[,field_size_deg][,age_years]``,
        settings as linear drives 0..1.
    references : xarray.DataArray (stimulus, wavelength), str or os.PathLike
        Spectral radiance of each reference stimulus (W sr⁻¹ m⁻² nm⁻¹), or a spectra CSV file.
    display : Display, xarray.DataArray (primary, wavelength), str or os.PathLike
        The test display: a :class:`metasim.Display`, its full-drive primary spectra, or a spectra
        CSV file.
    field_size_deg : float or array_like
        Field size in degrees (1-10), one or one per subject.
    age_years : float or array_like, optional
        Age in years (20-80), one or one per subject; None: unknown.

    Returns
    -------
    xarray.Dataset
        A matching session (:func:`metasim.matching_session_data`): ``setting`` (observer,
        stimulus, repeat, primary), ``reference_spectra``, ``display_spectra``, the attribute
        ``source`` naming the file.

    Raises
    ------
    FileFormatError
        A wrong header, a row with another number of cells, a cell that is not a number, or a
        per-subject value that changes (naming the file and line).
    FittingError
        A stimulus without a reference spectrum, primary columns other than the display's, or data
        the form refuses (:func:`check_matching_data`).

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.fitting import read_session_csv
    >>> display = metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    >>> references = gaussian([480, 560], 20, name=["cyan", "lime"])
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = Path(folder) / "session.csv"
    ...     _ = path.write_text("subject,stimulus,B,G,R\\ns01,cyan,0.40,0.35,0.02\\n"
    ...                         "s01,cyan,0.41,0.34,0.02\\ns01,lime,0.01,0.52,0.30\\n")
    ...     session = read_session_csv(path, references=references, display=display)
    >>> session["setting"].sel(observer="s01", stimulus="cyan").values.tolist()  # two repeats
    [[0.4, 0.35, 0.02], [0.41, 0.34, 0.02]]
    """
    subjects, stimuli, array, field, age, labels, _ = _table(path, "stimulus", False)
    if isinstance(references, (str, os.PathLike)):
        references = read_spectra_csv(references, dim="stimulus")
    if isinstance(display, (str, os.PathLike)):
        display = read_spectra_csv(display, dim="primary")
    if not isinstance(references, xr.DataArray):
        raise FittingError(f"references must be spectra (DataArray or CSV path), got {type(references).__name__}")
    ref_dim = [d for d in references.dims if d != "wavelength"]
    known = [str(v) for v in references[ref_dim[0]].values] if len(ref_dim) == 1 and ref_dim[0] in references.coords else []
    missing = [s for s in stimuli if s not in known]
    if missing:
        raise FittingError(f"{path}: stimulus {missing[0]!r} has no reference spectrum; references hold {known}")
    references = references.rename({ref_dim[0]: "stimulus"}).assign_coords(stimulus=known).sel(stimulus=stimuli)
    primary_names = list(display.primaries) if hasattr(display, "primaries") else (
        [str(v) for v in display["primary"].values] if isinstance(display, xr.DataArray) and "primary" in display.coords else [])
    if primary_names != labels:
        raise FittingError(f"{path}: primary columns {labels} do not match the display's primaries {primary_names} "
                           "(same names, same order)")
    field, age = _field_and_age(path, field, age, field_size_deg, age_years)
    ds = matching_session_data(array, references=references, display=display, subjects=subjects,
                               field_size_deg=field, age_years=age)
    ds.attrs["source"] = str(path)
    return ds


def read_matching_csv(path: str | os.PathLike, *, primaries=None, references=None, display=None,
                      field_size_deg=2.0, age_years=None) -> xr.Dataset:
    """Either CSV form, told apart by the header's second column (``test_wavelength_nm`` or ``stimulus``).

    Parameters
    ----------
    path : str or os.PathLike
        The CSV file (UTF-8).
    primaries
        For colour-matching functions: as :func:`read_matching_functions_csv`.
    references, display
        For matching sessions (both needed): as :func:`read_session_csv`.
    field_size_deg : float or array_like
        Field size in degrees (1-10), for subjects without that column.
    age_years : float or array_like, optional
        Age in years (20-80), for subjects without that column; None: unknown.

    Returns
    -------
    xarray.Dataset
        Colour-matching functions or a matching session (attribute ``matching_data``).

    Raises
    ------
    FileFormatError
        A header of neither form, or the errors of the two readers.
    FittingError
        A matching session without ``references`` or ``display``, or the errors of the two readers.

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> from metasim.fitting import read_matching_csv
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = Path(folder) / "matches.csv"
    ...     _ = path.write_text("# primary_wavelengths_nm: 645.16, 526.32, 444.44\\n"
    ...                         "subject,test_wavelength_nm,R,G,B\\ns01,450,0.02,0.05,0.90\\n")
    ...     data = read_matching_csv(path)
    >>> data.attrs["matching_data"]
    'colour-matching functions'
    """
    path = Path(path)
    _, records = read_csv_rows(path, "matching CSV file")
    header = records[0][1] if records else []
    key = header[1].strip() if len(header) > 1 else ""
    if key == "test_wavelength_nm":
        return read_matching_functions_csv(path, primaries=primaries, field_size_deg=field_size_deg, age_years=age_years)
    if key == "stimulus":
        if references is None or display is None:
            raise FittingError(f"{path}: matching sessions need the reference spectra and the display")
        return read_session_csv(path, references=references, display=display, field_size_deg=field_size_deg,
                                age_years=age_years)
    raise FileFormatError(f"{path}: header {header!r}; expected 'subject,test_wavelength_nm,...' (colour-matching "
                          "functions) or 'subject,stimulus,...' (matching sessions)")


__all__ = ["read_matching_functions_csv", "read_session_csv", "read_matching_csv"]
