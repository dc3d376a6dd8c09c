"""The mismatch engine: how differently a population of observers sees a reference and a test rendering.

Procedure (all observers and stimuli at once; no Python loop over either):

1. **Reference rendering.** A reference :class:`~metasim.display.Display`, or real surfaces
   (reflectances × an illuminant scaled so that a perfect white diffuser has the stated luminance).
2. **White match.** With ``match_white=True`` (default) the test display's white is calibrated to
   the reference white *as the calibration observer sees it* (chromaticity and luminance) — the way a
   colourist matches a new display to a reference with a colorimeter built for that observer.
3. **Colour match.** Every stimulus is rendered on the reference (for a reference display: drives
   solved for the calibration observer), and the test display is driven so that the calibration
   observer sees the same XYZ (:func:`metasim.display.solve_drive`, with the chosen strategy for
   N > 3 primaries). Stimuli a side cannot reproduce are clipped and flagged.
4. **Every observer's view.** Observer × primary tristimulus matrices are integrated once; each
   observer's XYZ of both sides is then drive × matrix (+ black). CIELAB uses the white the observer
   is adapted to: by default the *reference white as that observer sees it* (both sides are judged
   in one adaptation state, as in side-by-side comparison); ``adapted_white="test"`` uses the test
   display's white instead. CIE 2000 differences per observer × stimulus follow, plus ΔE_ITP
   (ITU-R BT.2124) from the absolute XYZ (all luminances here are absolute, cd/m²) and the
   observer-change metamerism index (:mod:`metasim.metamerism.index`): the additive correction is
   the test display's residual for the calibration observer, which is zero for stimuli inside the
   test gamut (matched by construction), so there the index equals ΔE00.
5. **Summaries** (:mod:`metasim.metamerism.summary`).

References
----------
CIE 15:2004 (CIELAB); CIE 142-2001 (CIE 2000 colour difference); ITU-R BT.2124-0 (ΔE_ITP);
ISO 18314-4 (metamerism index with additive correction, here for a change of observer).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim._memory import largest_fitting, require_memory
from metasim._threads import blas_single_threaded
from metasim._version import __version__
from metasim.colorimetry import tristimulus
from metasim.colorimetry.cielab import LAB, lab_of_ratio, xyz_to_lab_array
from metasim.colorimetry.difference import delta_e_2000_array
from metasim.colorimetry.fused import driven_pair_differences, pair_differences
from metasim.colorimetry.ictcp import delta_e_itp_values, xyz_to_ictcp_values
from metasim.colorimetry.integration import apply_matrices
from metasim.display import Display, calibrate_white
from metasim.display.drive import drive_solution
from metasim.display.optics import display_matrices, observer_xyz
from metasim.errors import MismatchError, ObserverError, StimulusError
from metasim.labelling import coordinates, labelled
from metasim.metamerism.stimuli import as_stimuli, check_stimuli, stimulus_illuminant
from metasim.metamerism.summary import DECADES, THRESHOLDS, observer_weights, summary_variables
from metasim.observers.standard import STANDARD_OBSERVERS, standard_observer
from metasim.observers.convert import as_observer, is_colour_observer
from metasim.spectra import RADIANCE_UNITS, require_same_grid
from metasim.spectra.convert import as_spectra, is_colour_object, is_colour_spectrum
from metasim.units import DELTA_E00, DELTA_E_ITP
from metasim.checks import current_spelling
from metasim.display.drive import RENAMED_STRATEGIES

ADAPTED_WHITES = ("reference", "test")
#: the reference that is the stimuli themselves, as real surfaces under their own illuminant
SURFACES = "surfaces"
#: old names of references, still accepted for one release
RENAMED_REFERENCES = {"objects": SURFACES}
#: Peak memory of mismatch() per observer x stimulus x design pair: about 16 float64 measured
#: (both sides' XYZ and CIELAB, differences, index, summaries), 20 allowed.
MISMATCH_BYTES_PER_PAIR = 20 * 8


def resolve_observers(observers, wavelengths) -> xr.Dataset:
    """Observers as a Dataset with ``cmf`` and an ``observer`` dim on the given grid.

    Accepted: an observer Dataset, standard observer names, colour-science colour-matching
    functions (``XYZ_ColourMatchingFunctions``, put on the grid), or a list mixing names and
    colour-science objects (labelled by name).

    Parameters
    ----------
    observers : str, list, colour.XYZ_ColourMatchingFunctions or xarray.Dataset
        Standard observer names (``cie1931_2``, ``cie1964_10``, ``cie2015_2``, ``cie2015_10``),
        colour-science colour-matching functions, a list mixing both (unique names), or an observer
        Dataset with ``cmf`` (observer, xyz, wavelength), e.g. from
        :func:`metasim.observer_population` (one observer without an ``observer`` dim gets one).
    wavelengths : array_like or xarray.DataArray (wavelength)
        The displays' grid in nm; names and colour-science objects are put on it, a Dataset must
        already be on it.

    Returns
    -------
    xarray.Dataset
        ``cmf`` (observer, xyz, wavelength; unit 1), the ``observer`` coordinate holding the names
        for names and colour-science objects.

    Raises
    ------
    ObserverError
        An empty set, an unknown name, repeated names, colour-science cone fundamentals only, or an
        object that is none of the above.
    GridMismatchError
        An observer Dataset on another grid than ``wavelengths``.

    References
    ----------
    CIE 15:2018 Colorimetry, 4th edition (CIE 1931 and 1964 standard observers); CIE 170-2:2015.

    Examples
    --------
    >>> from metasim.metamerism import resolve_observers
    >>> from metasim.spectra import wavelength_grid
    >>> observers = resolve_observers(["cie1931_2", "cie1964_10"], wavelength_grid(390, 830, 5))
    >>> observers["cmf"].dims, observers["observer"].values.tolist()
    (('observer', 'xyz', 'wavelength'), ['cie1931_2', 'cie1964_10'])
    """
    if isinstance(observers, np.ndarray):
        as_observer(observers)  # refused, with how to label it
    if isinstance(observers, str) or is_colour_object(observers):
        observers = [observers]
    if isinstance(observers, (list, tuple)):
        if not observers:
            raise ObserverError("the observer set is empty; give at least one observer")
        parts, labels = [], []
        for item in observers:
            if is_colour_observer(item):
                converted = as_observer(item, wavelengths)
                if "cmf" not in converted:
                    raise ObserverError(f"observer {str(item.name)!r} holds cone fundamentals only; mismatch "
                                        "needs XYZ colour-matching functions (XYZ_ColourMatchingFunctions)")
                parts.append(converted[["cmf"]])
                labels.append(str(item.name))
                continue
            if not isinstance(item, str) or item not in STANDARD_OBSERVERS:
                raise ObserverError(f"observer {item!r} is not a standard observer; allowed: {', '.join(STANDARD_OBSERVERS)}, "
                                    "colour-science XYZ_ColourMatchingFunctions, or an observer Dataset")
            parts.append(standard_observer(item, wavelengths)[["cmf"]])
            labels.append(item)
        if len(set(labels)) != len(labels):
            raise ObserverError(f"observer names {labels} repeat; each observer needs a unique name")
        ds = xr.concat(parts, dim="observer", combine_attrs="drop_conflicts")
        return ds.assign_coords(observer=labels)
    if not isinstance(observers, xr.Dataset) or "cmf" not in observers:
        raise ObserverError("observers must be standard observer names, colour-science colour-matching functions "
                            "or an observer Dataset with a 'cmf' variable")
    if "observer" not in observers.dims:
        observers = observers.expand_dims(observer=[str(observers.attrs.get("observer", "observer"))])
    if observers.sizes["observer"] == 0:
        raise ObserverError("the observer set is empty; give at least one observer")
    require_same_grid(observers, wavelengths, names=("observers", "displays"))
    return observers


def resolve_calibration_observer(calibration_observer, observers: xr.Dataset, wavelengths) -> tuple[xr.Dataset, str]:
    """The calibration observer (no ``observer`` dim) and its name.

    ``"population_mean"`` is the mean of the observers' colour-matching functions.

    Parameters
    ----------
    calibration_observer : str, xarray.Dataset or colour.XYZ_ColourMatchingFunctions
        A standard observer name (``cie1931_2``, ``cie1964_10``, ``cie2015_2``, ``cie2015_10``),
        ``"population_mean"``, an observer Dataset with ``cmf`` (xyz, wavelength; an ``observer``
        dim of length 1 is dropped) or colour-science colour-matching functions.
    observers : xarray.Dataset
        The observers of the study, ``cmf`` (observer, xyz, wavelength) as from
        :func:`resolve_observers` (used for ``"population_mean"``).
    wavelengths : array_like or xarray.DataArray (wavelength)
        The displays' grid in nm.

    Returns
    -------
    tuple of (xarray.Dataset, str)
        The observer, ``cmf`` (xyz, wavelength; unit 1), and its name (a Dataset's ``observer``
        attribute, else "custom").

    Raises
    ------
    ObserverError
        An unknown name, a Dataset of more than one observer, or another kind of object.
    GridMismatchError
        An observer Dataset on another grid than ``wavelengths``.

    References
    ----------
    CIE 15:2018 Colorimetry, 4th edition (CIE 1931 and 1964 standard observers); CIE 170-2:2015.

    Examples
    --------
    >>> from metasim.metamerism import resolve_calibration_observer, resolve_observers
    >>> from metasim.spectra import wavelength_grid
    >>> grid = wavelength_grid(390, 830, 5)
    >>> observers = resolve_observers(["cie1931_2", "cie1964_10"], grid)
    >>> calibration, name = resolve_calibration_observer("population_mean", observers, grid)
    >>> name, calibration["cmf"].dims
    ('population_mean', ('xyz', 'wavelength'))
    """
    if isinstance(calibration_observer, str):
        if calibration_observer == "population_mean":
            cmf = observers["cmf"].mean("observer")
            cmf.attrs = {"units": "1", "long_name": "mean colour-matching functions of the population"}
            ds = xr.Dataset({"cmf": cmf}, attrs={"observer": "population_mean"})
            return ds, "population_mean"
        if calibration_observer not in STANDARD_OBSERVERS:
            raise ObserverError(
                f"calibration observer {calibration_observer!r} is not known; allowed: "
                f"{', '.join(STANDARD_OBSERVERS)}, population_mean, or an observer Dataset"
            )
        return standard_observer(calibration_observer, wavelengths), calibration_observer
    if is_colour_object(calibration_observer) or isinstance(calibration_observer, np.ndarray):
        calibration_observer = as_observer(calibration_observer, wavelengths)
    if isinstance(calibration_observer, xr.Dataset) and "cmf" in calibration_observer:
        ds = calibration_observer
        if "observer" in ds.dims:
            if ds.sizes["observer"] != 1:
                raise ObserverError("the calibration observer must be one observer; select it with .isel(observer=i)")
            ds = ds.isel(observer=0, drop=True)
        require_same_grid(ds, wavelengths, names=("calibration observer", "displays"))
        return ds, str(ds.attrs.get("observer", "custom"))
    raise ObserverError("calibration_observer must be a standard observer name, 'population_mean', an observer Dataset "
                        "or colour-science XYZ_ColourMatchingFunctions")


def resolve_reference(reference, wavelengths):
    """The ``reference`` argument at a public entry: a colour-science ``SpectralDistribution`` (an
    illuminant) becomes a ``wavelength`` DataArray on the test display's grid; anything else is
    returned unchanged, but for the old name of ``"surfaces"`` (``"objects"``, accepted for one release)."""
    if isinstance(reference, str):
        return current_spelling(reference, RENAMED_REFERENCES, "reference", stacklevel=4)
    if is_colour_spectrum(reference):
        return as_spectra(reference, wavelengths=wavelengths, where="reference illuminant",
                          dims_example=("wavelength",))
    return reference


def reference_white_spectrum(reference, stimuli: xr.Dataset | None, test: Display, calibration: xr.Dataset,
                             object_white_luminance=None) -> tuple[xr.DataArray, str]:
    """The reference white radiance and the reference kind ("display" or "surfaces")."""
    reference = resolve_reference(reference, test.wavelengths.values)
    if isinstance(reference, Display):
        require_same_grid(reference.spectra, test.spectra, names=("reference display", "test display"))
        if reference.batch_dims:
            raise MismatchError(f"the reference display must be a single design, got dims {reference.batch_dims}")
        return reference.white_spectrum(), "display"
    if isinstance(reference, str) and reference == SURFACES:
        if stimuli is None or stimuli.attrs.get("kind") != "reflectance":
            raise StimulusError("reference='surfaces' needs reflectance stimuli (e.g. cie_13_3_samples())")
        illuminant = stimulus_illuminant(stimuli, test.wavelengths.values)
    elif isinstance(reference, xr.DataArray) and set(reference.dims) == {"wavelength"}:
        illuminant = reference
        require_same_grid(illuminant, test.spectra, names=("reference illuminant", "test display"))
    else:
        raise MismatchError("reference must be a Display, 'surfaces', or an illuminant spectrum (a wavelength-only "
                            f"DataArray or a colour-science SpectralDistribution), got {type(reference).__name__}")
    if object_white_luminance is None:
        object_white_luminance = float(test.white_tristimulus(calibration).sel(xyz="Y").max())
    if not np.isfinite(object_white_luminance) or object_white_luminance <= 0:
        raise MismatchError(f"object_white_luminance={object_white_luminance!r} cd/m2 is not allowed; must be > 0")
    y = float(tristimulus(illuminant, calibration).sel(xyz="Y"))
    if y <= 0:
        raise MismatchError("the reference illuminant has no luminance for the calibration observer")
    white = illuminant * (object_white_luminance / y)
    white.attrs = {"units": RADIANCE_UNITS, "long_name": "radiance of a perfect white diffuser under the illuminant"}
    return white, SURFACES


def _reference_targets(reference, kind: str, stimuli: xr.Dataset, calibration, white_spectrum, reference_kind: str):
    """Reference rendering for the calibration observer: (target XYZ, drive solution or spectra)."""
    if reference_kind == SURFACES:
        spectra = (stimuli["reflectance"] * white_spectrum).transpose("stimulus", "wavelength")
        spectra.attrs = {"units": RADIANCE_UNITS, "long_name": "reflected spectral radiance"}
        return tristimulus(spectra, calibration), spectra
    if kind == "rgb":
        solution = drive_solution(reference, rgb=stimuli["signal"], source=stimuli.attrs.get("source", "bt709"),
                                  encoding=stimuli.attrs.get("encoding") or None, observer=calibration)
    else:
        white_y = tristimulus(white_spectrum, calibration).sel(xyz="Y", drop=True)
        if kind == "xyz":
            target = stimuli["xyz_relative"] * (white_y / 100.0)
        else:
            illuminant = stimulus_illuminant(stimuli, white_spectrum.wavelength.values)
            scale = white_y / tristimulus(illuminant, calibration).sel(xyz="Y", drop=True)
            target = tristimulus(stimuli["reflectance"] * illuminant * scale, calibration)
        solution = drive_solution(reference, target=target.transpose("stimulus", "xyz"), observer=calibration)
    # the test display aims at the source colour, or at what the reference shows where it had to clip
    values = np.where(solution.out_of_gamut[..., None], solution.reproduced, solution.target)
    targets = labelled(values.reshape(solution.sizes + [3]), (*solution.dims, "xyz"), [solution.coords()],
                       attrs={"units": "cd m-2", "long_name": "target tristimulus values"})
    return targets.transpose("stimulus", "xyz"), solution


class ReferenceSide:
    """The half of a mismatch that does not depend on the test display: the observers, the
    calibration observer, the reference white and the reference rendering of every stimulus.

    :func:`mismatch` makes one per call; a sweep makes one for all its designs
    (:func:`reference_side`) and evaluates each block of designs against it, so the reference is
    rendered once. ``matched`` and ``test_drives`` are the test display's white match and colour
    match exactly as :func:`mismatch` does them.
    """

    def __init__(self, reference, kind, reference_kind, observers, calibration, calibration_name, white_spectrum,
                 white_calibration, targets, rendering, reference_calibration):
        self.reference, self.kind, self.reference_kind = reference, kind, reference_kind
        self.observers, self.calibration, self.calibration_name = observers, calibration, calibration_name
        self.white_spectrum, self.white_calibration = white_spectrum, white_calibration
        self.targets, self.rendering, self.reference_calibration = targets, rendering, reference_calibration

    def matched(self, test: Display) -> Display:
        """The test display white-calibrated to the reference white as the calibration observer sees it."""
        X, Y, Z = self.white_calibration.transpose("xyz").values  # one white: xy as xyz_to_xy computes it
        total = X + Y + Z
        return calibrate_white(test, self.calibration, white=(X / total, Y / total), luminance=float(Y))

    def test_drives(self, test: Display, strategy: str = "min_norm", strategy_population=None):
        """The test display's drive solution for every target (:func:`metasim.display.drive.drive_solution`)."""
        strategy_args = {}
        strategy = current_spelling(strategy, RENAMED_STRATEGIES, "strategy", stacklevel=4)
        if strategy == "least_mismatch":
            population = self.observers if strategy_population is None else strategy_population
            display = self.reference_kind == "display"
            strategy_args = {"population": population, "reference": self.reference if display else self.rendering,
                             "reference_white": None if display else self.white_spectrum}
        return drive_solution(test, target=self.targets, observer=self.calibration, strategy=strategy, **strategy_args)


def reference_side(reference, test: Display, observers, stimuli: xr.Dataset, *, calibration_observer="cie1931_2",
                   object_white_luminance: float | None = None, designs: int | None = None) -> ReferenceSide:
    """The test-independent half of :func:`mismatch` (see :class:`ReferenceSide`); ``test`` gives the
    wavelength grid (and, for object references without ``object_white_luminance``, the luminance).
    With ``designs``, the memory of a mismatch of that many designs is checked
    (:func:`check_mismatch_memory`) as soon as the observers and stimuli are known, before the
    reference is rendered."""
    if not isinstance(test, Display):
        raise MismatchError(f"test must be a Display, got {type(test).__name__}")
    grid = test.wavelengths
    stimuli = as_stimuli(stimuli, grid.values)
    reference = resolve_reference(reference, grid.values)
    kind = check_stimuli(stimuli)
    if kind == "reflectance":
        require_same_grid(stimuli["reflectance"], grid, names=("reflectance stimuli", "test display"))
    population = resolve_observers(observers, grid)
    if designs is not None:
        check_mismatch_memory(population.sizes["observer"], stimuli.sizes.get("stimulus", 1), designs)
    calibration, calibration_name = resolve_calibration_observer(calibration_observer, population, grid)
    white_spectrum, reference_kind = reference_white_spectrum(reference, stimuli, test, calibration,
                                                              object_white_luminance)
    white_calibration = tristimulus(white_spectrum, calibration)
    targets, rendering = _reference_targets(reference, kind, stimuli, calibration, white_spectrum, reference_kind)
    # what the reference shows to the calibration observer (the standard under the reference condition)
    reference_calibration = rendering.variable("reproduced") if reference_kind == "display" else targets.variable
    side = ReferenceSide(reference if reference_kind == "display" else None, kind, reference_kind, population,
                         calibration, calibration_name, white_spectrum, white_calibration, targets, rendering,
                         reference_calibration)
    side.given_reference, side.stimuli = reference, stimuli
    return side


def check_mismatch_memory(observers: int, stimuli: int, designs: int = 1) -> None:
    """Refuse, before anything is allocated, a :func:`mismatch` whose estimated memory
    (:data:`MISMATCH_BYTES_PER_PAIR` per observer × stimulus × design) exceeds what the machine has
    available (:class:`~metasim.errors.NotEnoughMemoryError`)."""
    require_memory(MISMATCH_BYTES_PER_PAIR * observers * stimuli * designs,
                   f"a mismatch of {observers:,} observers x {stimuli:,} stimuli x {designs:,} designs",
                   f"use at most about {largest_fitting(MISMATCH_BYTES_PER_PAIR):,} observer x stimulus x design pairs")


@blas_single_threaded
def mismatch(
    reference,
    test: Display,
    observers,
    stimuli: xr.Dataset,
    *,
    calibration_observer="cie1931_2",
    strategy: str = "min_norm",
    strategy_population=None,
    match_white: bool = True,
    adapted_white: str = "reference",
    object_white_luminance: float | None = None,
    include_itp: bool | None = None,
    age_bands=DECADES,
    thresholds=THRESHOLDS,
) -> xr.Dataset:
    """Compare a reference rendering with a test display for a set of observers and stimuli.

    Parameters
    ----------
    reference : Display, "surfaces" or DataArray
        A reference display; ``"surfaces"`` for reflectance stimuli as real surfaces under their own
        illuminant (old name ``"objects"``, still accepted for one release); or
        an illuminant spectrum (``wavelength`` only, or a colour-science ``SpectralDistribution``
        put on the test display's grid) for reflectance stimuli.
    test : Display
        The test display (may carry a ``design`` dim: every design is evaluated).
    observers : Dataset or str or list of str
        Observer population (``cmf`` with an ``observer`` dim, e.g. from
        :func:`metasim.observer_population` or :func:`metasim.observer_categories`), standard
        observer names, or colour-science ``XYZ_ColourMatchingFunctions`` (one, or a list).
    stimuli : Dataset
        A stimulus set (:mod:`metasim.metamerism.stimuli`), or colour-science reflectances (a
        ``MultiSpectralDistributions``, or a colour checker's distributions), taken as a
        reflectance set on the test display's grid.
    calibration_observer : str or Dataset
        The observer both sides are matched for (default CIE 1931 2°); ``"population_mean"`` uses
        the mean colour-matching functions of ``observers``; colour-science colour-matching
        functions are accepted.
    strategy : str
        Drive strategy of the test display for N > 3 primaries (:data:`metasim.display.STRATEGIES`);
        ``"least_mismatch"`` (old name ``"population"``, accepted for one release) minimises the
        expected mismatch over ``strategy_population`` (default
        ``observers``).
    match_white : bool
        Calibrate the test white to the reference white for the calibration observer first.
    adapted_white : {"reference", "test"}
        The white each observer's CIELAB is computed against, as that observer sees it.
    object_white_luminance : float, optional
        cd/m² of a perfect white diffuser for object references (default: the test white).
    include_itp : bool, optional
        Compute ΔE_ITP (ITU-R BT.2124, from the absolute XYZ); default: when either display uses an
        HDR transfer function (PQ or HLG).
    age_bands, thresholds : see :func:`metasim.metamerism.summary.summarise` (default age bands: the
        decades that cover the observers' ages, :func:`metasim.metamerism.summary.decade_age_bands`).

    Returns
    -------
    Dataset
        ``xyz_reference``, ``xyz_test`` (observer × stimulus × xyz, cd/m²), ``lab_reference``,
        ``lab_test``, ``adapted_white_xyz``, ``delta_e_2000`` (observer × stimulus), ``delta_e_itp``,
        ``metamerism_index``, ``delta_e_white`` (observer), ``delta_e_2000_calibration`` (stimulus),
        ``drive_test``, flags ``out_of_gamut_reference`` / ``out_of_gamut_test`` / ``out_of_gamut_both``
        and the summaries of :func:`~metasim.metamerism.summary.summarise`.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.metamerism import neutral_ramp
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> lasers = metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    >>> viewers = metasim.observer_population(4, seed=1, age_years=(20, 70))
    >>> result = metasim.mismatch(monitor, lasers, viewers, neutral_ramp(3))
    >>> dict(result["delta_e_2000"].sizes), float(result["delta_e_2000_calibration"].max()) < 1e-6
    ({'observer': 4, 'stimulus': 3}, True)
    """
    if not isinstance(test, Display):
        raise MismatchError(f"test must be a Display, got {type(test).__name__}")
    if adapted_white not in ADAPTED_WHITES:
        raise MismatchError(f"adapted_white={adapted_white!r} is not known; allowed: {', '.join(ADAPTED_WHITES)}")
    designs = int(np.prod([test.spectra.sizes[d] for d in test.batch_dims])) if test.batch_dims else 1
    side = reference_side(reference, test, observers, stimuli, calibration_observer=calibration_observer,
                          object_white_luminance=object_white_luminance, designs=designs)
    if include_itp is None:
        transfers = {test.transfer} | ({side.reference.transfer} if side.reference is not None else set())
        include_itp = bool(transfers & {"pq", "hlg"})
    if match_white:
        test = side.matched(test)
    strategy = current_spelling(strategy, RENAMED_STRATEGIES, "strategy")
    solution = side.test_drives(test, strategy, strategy_population)
    # every observer's XYZ of both sides: integrate observer x primary once, then small dense algebra
    core = _observer_core(side.reference, side.rendering, test, solution, side.white_spectrum, side.observers,
                          adapted_white, side.reference_calibration, include_itp)
    out = _mismatch_dataset(side, test, solution, core, adapted_white, age_bands=age_bands, thresholds=thresholds)
    out.attrs = result_attrs(side, test.name, match_white, adapted_white, strategy)
    return out


def _mismatch_dataset(side: ReferenceSide, test: Display, solution, core: dict, adapted_white: str, *,
                      age_bands, thresholds) -> xr.Dataset:
    """The result Dataset of :func:`mismatch`: every observer's view (``core``), the calibration
    observer's view, drives, gamut flags and summaries, with one set of coordinates."""
    calibration_white = (side.white_calibration if adapted_white == "reference"
                         else test.white_tristimulus(side.calibration))
    delta_e_calibration = delta_e_variable(lab_variable(side.reference_calibration, calibration_white.variable),
                                           lab_variable(solution.variable("reproduced"), calibration_white.variable))
    test_clipped = solution.variable("out_of_gamut").astype(bool)
    reference_clipped = (side.rendering.variable("out_of_gamut").astype(bool) if side.reference_kind == "display"
                         else xr.zeros_like(test_clipped))
    described = [
        ("xyz_reference", "tristimulus values of the reference rendering, per observer", "cd m-2"),
        ("xyz_test", "tristimulus values of the test rendering, per observer", "cd m-2"),
        ("lab_reference", "CIELAB of the reference rendering (observer's adapted white)", "1"),
        ("lab_test", "CIELAB of the test rendering (observer's adapted white)", "1"),
        ("adapted_white_xyz", f"white each observer is adapted to ({adapted_white} white as they see it)", "cd m-2"),
        ("delta_e_2000", "CIE 2000 colour difference, reference vs test, per observer", DELTA_E00),
        ("metamerism_index", "observer-change metamerism index, additive correction (ISO 18314-4 style)", DELTA_E00),
        ("delta_e_white", "CIE 2000 difference between the two whites, per observer", DELTA_E00),
        ("delta_e_itp", "ITU-R BT.2124 difference, reference vs test, per observer", DELTA_E_ITP),
    ]
    data = {name: (*core[name], {"units": units, "long_name": long_name})
            for name, long_name, units in described if name in core}
    given = [
        ("delta_e_2000_calibration", delta_e_calibration, "CIE 2000 difference for the calibration observer", DELTA_E00),
        ("drive_test", solution.variable("drive"), "linear drive values of the test display", "1"),
        ("target_xyz", side.targets.variable,
         "reference XYZ for the calibration observer (targets of the test display)", "cd m-2"),
        ("out_of_gamut_test", test_clipped, "stimulus outside the test gamut (clipped)", "1"),
        ("out_of_gamut_reference", reference_clipped, "stimulus outside the reference gamut (clipped)", "1"),
        ("out_of_gamut_both", test_clipped & reference_clipped, "stimulus outside both gamuts", "1"),
        ("residual_delta_e_test", solution.variable("residual_delta_e"),
         "CIE 2000 residual of the test display vs its target", DELTA_E00),
    ]
    sources = [test.spectra, side.observers, solution.coords()]
    if side.reference_kind == "display":
        reference_drive = side.rendering.variable("drive")
        given.append(("residual_delta_e_reference", side.rendering.variable("residual_delta_e"),
                      "CIE 2000 residual of the reference display vs the source colour", DELTA_E00))
        given.append(("drive_reference", xr.Variable((*reference_drive.dims[:-1], "reference_primary"),
                                                     reference_drive.data),
                      "linear drive values of the reference display", "1"))
        sources.append(_renamed_primaries(side.reference))
    else:
        sources.append(side.targets)
    for name, variable, long_name, units in given:
        data[name] = (variable.dims, variable.data, {"units": units, "long_name": long_name})
    pair_dims, delta_e = core["delta_e_2000"]
    rest = [d for d in pair_dims if d not in ("observer", "stimulus")]
    observers = side.observers
    summaries, summary_coords = summary_variables(
        np.moveaxis(delta_e, [pair_dims.index("observer"), pair_dims.index("stimulus")], [0, 1]), rest,
        observer_weights(observers),
        observers.coords.variables["age_years"].values if "age_years" in observers.coords else None,
        age_bands=age_bands, thresholds=thresholds, name="delta_e_2000")
    data.update(summaries)
    dims = {d for value in data.values() for d in value[0]}
    coords = coordinates(dims, [*sources, summary_coords], labels={"xyz": ("X", "Y", "Z"), "lab": LAB})
    return xr.Dataset(data, coords=coords)


def result_attrs(side: ReferenceSide, test_name: str, match_white: bool, adapted_white: str, strategy: str) -> dict:
    """The attributes of a mismatch result (what was compared, how, with which observers)."""
    reference, stimuli, observers = side.given_reference, side.stimuli, side.observers
    return {
        "model": "observer mismatch between a reference rendering and a test display (metasim)",
        "reference": reference.name if side.reference_kind == "display" else "surfaces under " + (
            str(reference.name or "the given illuminant") if isinstance(reference, xr.DataArray)
            else str(stimuli.attrs.get("illuminant", "illuminant"))),
        "reference_kind": side.reference_kind,
        "test": test_name,
        "calibration_observer": side.calibration_name,
        "white_matched": bool(match_white),
        "adapted_white": f"{adapted_white} white as each observer sees it",
        "drive_strategy": strategy,
        "stimuli": stimuli.attrs.get("description", side.kind),
        "stimulus_kind": side.kind,
        "observer_model": str(observers.attrs.get("model", "standard observers")),
        "observer_seed": observers.attrs.get("seed", "none"),
        "observer_peak_shift_axis": str(observers.attrs.get("peak_shift_axis", "none (no individual deviations)")),
        "thresholds_source": "1, 2, 3 CIE 2000 units: common practice, no source",
        "metasim_version": __version__,
    }


def flat_observers(observers: xr.Dataset) -> tuple[np.ndarray, float]:
    """Observer functions as (observer, xyz, wavelength) float64 and the grid step."""
    cmf = observers.variables["cmf"].transpose("observer", "xyz", "wavelength")
    wl = observers.variables["wavelength"].values
    return np.ascontiguousarray(cmf.values, dtype=float), float(wl[1] - wl[0])


def _observer_core(reference, reference_rendering, test: Display, solution, white_spectrum, observers,
                   adapted_white, targets, include_itp):
    """Every observer's XYZ, CIELAB and differences of both sides, as labelled arrays.

    numpy on (design, observer, stimulus, 3) blocks: one matrix product per display for the
    observer × primary matrices, then einsum, CIELAB and the compiled CIE 2000 kernel.
    """
    cmf, step = flat_observers(observers)
    batch = test.batch_dims
    batch_shape = [test.spectra.sizes[d] for d in batch]
    matrices = display_matrices([test] if reference is None else [test, reference], cmf, step)
    test_matrices, test_black = matrices[0]  # (B, O, 3, N), (B, O, 3)
    stimulus_dims = list(solution.dims[len(batch):])
    test_white = test_matrices.sum(-1) + test_black  # (B, O, 3)
    if reference is not None:
        reference_matrices, reference_black = matrices[1]
        # (O, 3), summed like the test white so equal displays agree exactly
        reference_white = reference_matrices[0].sum(-1) + reference_black[0]
    else:
        # the white and every object's reflected light in one integration: (O, 3, 1 + S)
        n_wavelengths = cmf.shape[-1]
        light = np.concatenate([white_spectrum.values.reshape(1, n_wavelengths),
                                reference_rendering.transpose(*stimulus_dims, "wavelength").values.reshape(-1, n_wavelengths)])
        seen = observer_xyz(cmf, step, light).reshape(cmf.shape[0], 3, -1)
        reference_white = seen[..., 0]  # (O, 3)
    adapted = np.broadcast_to(reference_white, test_white.shape) if adapted_white == "reference" else test_white
    # observer-change metamerism index, additive correction in XYZ (reference condition: calibration
    # observer): the test side minus (test − reference as the calibration observer sees them). A
    # stimulus inside the test gamut is matched for the calibration observer by construction
    # (A·d = target); its residual is the solver's rounding (~1e-13 cd/m²), so its correction is
    # zero and its index is its ΔE00. Clipped stimuli carry their real residual.
    target_xyz = targets.transpose(*[d for d in batch if d in targets.dims], *stimulus_dims, "xyz").values
    reproduced = solution.reproduced
    target_xyz = np.broadcast_to(target_xyz.reshape(-1 if target_xyz.ndim > 2 and batch else 1, reproduced.shape[1], 3),
                                 reproduced.shape)
    correction = np.where(solution.out_of_gamut[..., None], reproduced - target_xyz, 0.0)
    rows = test_matrices.shape[0] * cmf.shape[0]
    if reference is not None:  # both sides' XYZ from the drives, in the same pass as CIELAB and CIE 2000
        xyz_reference, xyz_test, lab_reference, lab_test, delta_e, index = driven_pair_differences(
            reference_rendering.drive, reference_matrices[:1], reference_black[:1], solution.drive, test_matrices,
            test_black, adapted.reshape(rows, 3), correction)
        xyz_reference_per_design = np.broadcast_to(xyz_reference, xyz_test.shape)
    else:
        xyz_reference = np.ascontiguousarray(np.swapaxes(seen[..., 1:], -1, -2))  # (O, S, 3)
        xyz_test = apply_matrices(solution.drive, test_matrices, test_black)  # (B, O, S, 3)
        xyz_reference_per_design = np.broadcast_to(xyz_reference, xyz_test.shape)
        n_stimuli = xyz_test.shape[2]
        lab_reference, lab_test, delta_e, index = pair_differences(
            xyz_reference_per_design.reshape(rows, n_stimuli, 3), xyz_test.reshape(rows, n_stimuli, 3),
            adapted.reshape(rows, 3), correction)
    delta_e_white = delta_e_2000_array(xyz_to_lab_array(np.broadcast_to(reference_white, test_white.shape), adapted),
                                       xyz_to_lab_array(test_white, adapted))
    delta_e_itp = itp_difference(xyz_reference_per_design, xyz_test) if include_itp else None

    sizes = {**dict(zip(batch, batch_shape)), "observer": cmf.shape[0], **dict(zip(solution.dims, solution.sizes))}
    pair_dims = (*batch, "observer", *stimulus_dims)
    observer_dims = (*batch, "observer")

    def shaped(values, dims, tail=()):
        return (*dims, *tail), np.reshape(values, [sizes[d] for d in dims] + [3] * len(tail))

    out = {
        "xyz_reference": shaped(xyz_reference_per_design if batch else xyz_reference, pair_dims, ("xyz",)),
        "xyz_test": shaped(xyz_test, pair_dims, ("xyz",)),
        "adapted_white_xyz": shaped(adapted, observer_dims, ("xyz",)),
        "lab_reference": shaped(lab_reference, pair_dims, ("lab",)),
        "lab_test": shaped(lab_test, pair_dims, ("lab",)),
        "delta_e_2000": shaped(delta_e, pair_dims),
        "delta_e_white": shaped(delta_e_white, observer_dims),
        "metamerism_index": shaped(index, pair_dims),
    }
    if delta_e_itp is not None:
        out["delta_e_itp"] = shaped(delta_e_itp, pair_dims)
    return out


def _renamed_primaries(display: Display) -> xr.Coordinates:
    """The display's coordinates along ``primary``, on a ``reference_primary`` dim (as DataArray.rename)."""
    coords = display.spectra.coords
    variables = {("reference_primary" if name == "primary" else name): xr.Variable(("reference_primary",), v.values, v.attrs)
                 for name, v in coords.variables.items() if v.dims == ("primary",)}
    return xr.Coordinates(variables)


def lab_variable(xyz: xr.Variable, white: xr.Variable) -> xr.Variable:
    """CIELAB of XYZ against a white, broadcast by dim name (as :func:`metasim.colorimetry.xyz_to_lab`)."""
    ratio = xyz / white
    dims = [d for d in ratio.dims if d != "xyz"]
    return xr.Variable((*dims, "lab"), lab_of_ratio(ratio.transpose(*dims, "xyz").values))


def delta_e_variable(lab_1: xr.Variable, lab_2: xr.Variable) -> xr.Variable:
    """CIE 2000 difference of two CIELAB Variables broadcast by dim name (dims in order of appearance)."""
    sizes = {**dict(zip(lab_1.dims, lab_1.shape)), **dict(zip(lab_2.dims, lab_2.shape))}
    full = {d: sizes[d] for d in [*[d for d in sizes if d != "lab"], "lab"]}
    values = delta_e_2000_array(lab_1.set_dims(full).values, lab_2.set_dims(full).values)
    return xr.Variable(tuple(full)[:-1], values)


def itp_difference(xyz_1: np.ndarray, xyz_2: np.ndarray) -> np.ndarray:
    """ΔE_ITP of two absolute XYZ arrays (last axis X, Y, Z), as :mod:`metasim.colorimetry.ictcp` defines it."""
    return delta_e_itp_values(xyz_to_ictcp_values(xyz_1), xyz_to_ictcp_values(xyz_2))


__all__ = ["ADAPTED_WHITES", "MISMATCH_BYTES_PER_PAIR", "ReferenceSide", "check_mismatch_memory", "mismatch",
           "reference_side", "resolve_observers", "resolve_calibration_observer", "resolve_reference",
           "reference_white_spectrum", "result_attrs", "flat_observers", "lab_variable", "delta_e_variable",
           "itp_difference"]
