"""The numbers of a block of designs against a reference prepared once: a sweep's inner loop.

:func:`prepare` does, once per sweep, everything of :func:`metasim.mismatch` that does not depend
on the designs (:class:`metasim.metamerism.engine.ReferenceSide`: the observers, the calibration
observer, the reference white and rendering) and what every observer sees of the reference.
:func:`design_statistics` then takes a block of designs (a Display with a ``design`` dim) through
the rest of the procedure with the engine's own steps (white match, drive solution, observer
matrices, the CIE 2000 column loops) and returns each design's summaries as plain arrays; no
labelled array is built per block and no XYZ or CIELAB array of the pairs is kept (a sweep keeps
only summaries). :func:`design_arrays` returns the differences themselves.

Every summary is the statistics layer's (:mod:`metasim.statistics`): with equal weights and no NaN
the per-design compiled pass summarises each design's pairs with the layer's selection kernel
(:mod:`metasim.statistics._kernels.order`, numpy's mean, linear quantiles and maximum bit for
bit); observer weights, ΔE_ITP or NaN take the layer's general route
(:func:`metasim.statistics.selection.statistics_of_rows`,
:func:`metasim.metamerism.summary.summary_variables`: weighted ``inverted_cdf`` quantiles).

The numbers equal those of one :func:`metasim.mismatch` call on the same designs summarised by the
statistics layer (``tests/test_sweep.py`` checks it).

Layer: sweep (imports display, metamerism, colorimetry, statistics).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim import _warmup
from metasim._threads import blas_single_threaded, run_in_parts
from metasim.colorimetry.cielab import xyz_to_lab_array
from metasim.colorimetry.difference import delta_e_2000_array
from metasim.colorimetry.fused import driven_pair_differences, pair_differences
from metasim.colorimetry._kernels.sums import padded_drives
from metasim.colorimetry._kernels.types import writable
from metasim.colorimetry.integration import apply_matrices
from metasim.display import Display
from metasim.display.optics import display_matrices, display_rows, observer_xyz
from metasim.errors import MismatchError
from metasim.metamerism.engine import (
    ADAPTED_WHITES,
    delta_e_variable,
    flat_observers,
    itp_difference,
    lab_variable,
    reference_side,
    result_attrs,
)
from metasim.metamerism.summary import (
    DECADES,
    OBSERVER_SHARE,
    PAIR_SHARE,
    STATISTICS,
    THRESHOLDS,
    age_band_members,
    age_band_edges,
    observer_weights,
    summary_variables,
)
from metasim.statistics.selection import statistics_of_rows
from metasim.sweep._kernels.designs import design_statistics as kernel_statistics
from metasim.sweep._kernels.designs import reference_columns


def pair_statistics(values: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """Statistics over all observer × stimulus pairs of each design, by the statistics layer:
    values (P, O, S) → (P, 4) mean, median, p95, max (each pair with its observer's weight)."""
    designs, observers, stimuli = values.shape
    return statistics_of_rows(values.reshape(designs, observers * stimuli),
                              None if weights is None else np.repeat(weights, stimuli))


def overall_shares(share: np.ndarray) -> np.ndarray:
    """Share of all pairs above each threshold (P, T) from the shares per stimulus (P, T, S): the
    mean over stimuli, added in the order the engine's summaries add them."""
    return np.ascontiguousarray(np.moveaxis(share, 0, -1)).mean(axis=1).T


def band_and_stimulus_statistics(values: np.ndarray, weights, ages, age_bands, thresholds, per_stimulus: bool):
    """Shares above the thresholds per stimulus (P, T, S), of all pairs (P, T), the statistics of
    each age band's pairs (P, 4, G; None without ages) and, if asked, the statistics over observers
    per stimulus (P, 4, S), as :func:`metasim.metamerism.summary.summary_variables` gives them for
    a mismatch result (the statistics layer's route); ``values`` (P, O, S)."""
    out, _ = summary_variables(np.moveaxis(values, 0, -1), ["design"], weights, ages, age_bands=age_bands,
                               thresholds=thresholds, name="d")
    share = np.moveaxis(out[OBSERVER_SHARE][1], -1, 0)
    by_age = np.moveaxis(out["d_by_age"][1], -1, 0) if "d_by_age" in out else None
    by_stimulus = np.moveaxis(out["d_by_stimulus"][1], -1, 0) if per_stimulus else None
    return share, np.moveaxis(out[PAIR_SHARE][1], -1, 0), by_age, by_stimulus


class SweepContext:
    """What a sweep's designs are judged against, made once by :func:`prepare`.

    Attributes: ``side`` (the :class:`~metasim.metamerism.engine.ReferenceSide`), ``cmf`` and
    ``step`` (the observers' functions as (observer, xyz, wavelength) and the grid step),
    ``white_reference`` (observer, 3) and ``xyz_reference`` (observer, stimulus, 3): what each
    observer sees of the reference (cd/m²); the options of the mismatch procedure; ``weights``
    (observer weights or None), ``bands`` (age-band labels, counts, membership masks, or None),
    ``thresholds``; ``attrs``: the attributes a mismatch result of these inputs carries.
    """

    def __init__(self, **values):
        self.__dict__.update(values)


@blas_single_threaded
def prepare(reference, test: Display, observers, stimuli: xr.Dataset, *, calibration_observer="cie1931_2",
            strategy: str = "min_norm", strategy_population=None, match_white: bool = True,
            adapted_white: str = "reference", object_white_luminance: float | None = None,
            include_itp: bool | None = None, age_bands=DECADES, thresholds=THRESHOLDS) -> SweepContext:
    """The design-independent part of :func:`metasim.mismatch` for designs like ``test``.

    ``test`` is any block of the designs (it gives the wavelength grid and the transfer function;
    every design of a sweep shares them). The options are those of :func:`metasim.mismatch`.
    """
    if adapted_white not in ADAPTED_WHITES:
        raise MismatchError(f"adapted_white={adapted_white!r} is not known; allowed: {', '.join(ADAPTED_WHITES)}")
    side = reference_side(reference, test, observers, stimuli, calibration_observer=calibration_observer,
                          object_white_luminance=object_white_luminance)
    if include_itp is None:
        transfers = {test.transfer} | ({reference.transfer} if isinstance(reference, Display) else set())
        include_itp = bool(transfers & {"pq", "hlg"})
    population = side.observers
    cmf, step = flat_observers(population)
    reference_matrices = None
    if side.reference_kind == "display":
        (reference_matrix, reference_black), = display_matrices([side.reference], cmf, step)
        reference_matrices = (reference_matrix[:1], reference_black[:1])
        white_reference = reference_matrix[0].sum(-1) + reference_black[0]  # (O, 3), summed as the engine sums the test white
        xyz_reference = apply_matrices(side.rendering.drive, reference_matrix[:1], reference_black[:1])[0]  # (O, S, 3)
    else:  # the white and every object's reflected light in one integration, as the engine does
        wavelengths = cmf.shape[-1]
        stimulus_dims = list(side.targets.dims[:-1])
        light = np.concatenate([side.white_spectrum.values.reshape(1, wavelengths),
                                side.rendering.transpose(*stimulus_dims, "wavelength").values.reshape(-1, wavelengths)])
        seen = observer_xyz(cmf, step, light).reshape(cmf.shape[0], 3, -1)
        white_reference = seen[..., 0]
        xyz_reference = np.ascontiguousarray(np.swapaxes(seen[..., 1:], -1, -2))
    # the reference columns of the compiled pass: CIELAB against each observer's reference white,
    # or (adapted to the test white) the XYZ, CIELAB then made per design
    xyz_reference = np.ascontiguousarray(xyz_reference, dtype=float)
    columns = np.empty((xyz_reference.shape[0], 3, padded_drives(np.zeros((1, xyz_reference.shape[1], 1))).shape[2]))
    _warmup.wait(reference_columns)  # compiled ahead in a helper process (the test suite)
    reference_columns(writable(xyz_reference), writable(white_reference), adapted_white == "reference", columns)
    weights = observer_weights(population["cmf"])
    ages = population.coords.variables["age_years"].values if "age_years" in population.coords else None
    edges = age_band_edges(age_bands, ages)
    bands = age_band_members(ages, edges) if edges else None
    attrs = {key: value for key, value in result_attrs(side, "", match_white, adapted_white, strategy).items()
             if key != "test"}
    return SweepContext(side=side, cmf=cmf, step=step, white_reference=white_reference, xyz_reference=xyz_reference,
                        reference_columns=columns,
                        reference_matrices=reference_matrices, strategy=strategy,
                        strategy_population=strategy_population, match_white=bool(match_white),
                        adapted_white=adapted_white, include_itp=include_itp, weights=weights, bands=bands,
                        age_bands=age_bands,
                        thresholds=writable(np.asarray(thresholds, dtype=float)), attrs=attrs)


def _shared_primary_matrices(context: SweepContext, test: Display, raw: np.ndarray):
    """Observer × primary XYZ (P, O, 3, N) and black (P, O, 3) of designs whose primaries repeat.

    ``raw`` (P, N, wavelength) are the designs' spectra before white calibration; ``test`` the
    calibrated designs (spectra = raw × ``primary_gain``). Each distinct raw spectrum is integrated
    once for every observer and scaled by each design's gains: in a grid of 10 × 10 × 10 designs
    30 spectra instead of 3,000. The same sums as integrating the calibrated spectra, the gain
    applied after the sum instead of before (values equal to about 1e-15 relative).
    """
    designs, primaries, wavelengths = raw.shape
    gain = test._ds["primary_gain"].variable.transpose("design", "primary").values
    black = display_rows(test)[:, -1]  # (P, wavelength): white calibration leaves the black as it is
    rows = np.ascontiguousarray(np.concatenate([raw.reshape(-1, wavelengths), black]), dtype=float)
    keys = rows.view(np.dtype((np.void, wavelengths * rows.itemsize))).ravel()
    _, first, inverse = np.unique(keys, return_index=True, return_inverse=True)
    observers = context.cmf.shape[0]
    seen = observer_xyz(context.cmf, context.step, rows[first]).reshape(observers, 3, -1)  # (O, 3, distinct)
    inverse = inverse.reshape(-1)
    matrices = seen[:, :, inverse[:designs * primaries].reshape(designs, primaries)]  # (O, 3, P, N)
    matrices = np.ascontiguousarray(matrices.transpose(2, 0, 1, 3)) * gain[:, None, None, :]
    black_xyz = np.ascontiguousarray(seen[:, :, inverse[designs * primaries:]].transpose(2, 0, 1))
    return matrices, black_xyz


class _TestSide:
    """A block of designs white-matched, driven and integrated for every observer (the engine's steps)."""

    def __init__(self, context: SweepContext, test: Display, raw: np.ndarray | None = None):
        side = context.side
        if context.match_white:
            test = side.matched(test)
        self.test = test
        self.solution = solution = side.test_drives(test, context.strategy, context.strategy_population)
        if raw is None:
            (self.matrices, self.black), = display_matrices([test], context.cmf, context.step)  # (P, O, 3, N), (P, O, 3)
        else:
            self.matrices, self.black = _shared_primary_matrices(context, test, raw)
        self.white = self.matrices.sum(-1) + self.black  # (P, O, 3)
        reference = context.white_reference
        self.adapted = np.broadcast_to(reference, self.white.shape) if context.adapted_white == "reference" else self.white
        # observer-change metamerism index: the test display's residual for the calibration observer
        # (zero inside the test gamut, where the match is exact by construction), as in the engine
        stimulus_dims = [d for d in solution.dims if d not in solution.batch]
        standard = side.reference_calibration.transpose(*stimulus_dims, "xyz").values  # the reference as the calibration observer sees it
        target_xyz = np.broadcast_to(standard.reshape(1, -1, 3), solution.reproduced.shape)
        self.correction = np.where(solution.out_of_gamut[..., None], solution.reproduced - target_xyz, 0.0)
        self.designs, self.observers = self.matrices.shape[0], self.matrices.shape[1]
        self.stimuli = solution.drive.shape[1]

    def rest(self, context: SweepContext) -> dict[str, np.ndarray]:
        """The white differences (P, O), calibration residuals (P, S) and out-of-gamut flags (P, S)."""
        side, solution = context.side, self.solution
        shape = (self.designs, self.observers)
        out = {"delta_e_white": delta_e_2000_array(
            xyz_to_lab_array(np.broadcast_to(context.white_reference, self.white.shape), self.adapted),
            xyz_to_lab_array(self.white, self.adapted)).reshape(shape)}
        calibration_white = (side.white_calibration if context.adapted_white == "reference"
                             else self.test.white_tristimulus(side.calibration))
        delta_e_calibration = delta_e_variable(lab_variable(side.reference_calibration, calibration_white.variable),
                                               lab_variable(solution.variable("reproduced"), calibration_white.variable))
        out["delta_e_2000_calibration"] = delta_e_calibration.transpose(*solution.dims).values.reshape(self.designs, self.stimuli)
        out["out_of_gamut"] = solution.out_of_gamut.astype(bool).reshape(self.designs, self.stimuli)
        return out

    def pairs(self, context: SweepContext, designs=slice(None)) -> dict[str, np.ndarray]:
        """CIE 2000 and the metamerism index of every pair (P, O, S) (and ΔE_ITP if included)."""
        solution, side = self.solution, context.side
        matrices, black = self.matrices[designs], self.black[designs]
        drive, correction = solution.drive[designs], self.correction[designs]
        count, observers, stimuli = matrices.shape[0], self.observers, self.stimuli
        rows = count * observers
        adapted = self.adapted[designs].reshape(rows, 3)
        xyz_test = None
        if context.reference_matrices is not None:
            reference_matrix, reference_black = context.reference_matrices
            _, xyz_test, _, _, delta_e, index = driven_pair_differences(
                side.rendering.drive, reference_matrix, reference_black, drive, matrices, black, adapted, correction)
        else:
            xyz_test = apply_matrices(drive, matrices, black)
            xyz_reference = np.broadcast_to(context.xyz_reference, xyz_test.shape)
            _, _, delta_e, index = pair_differences(xyz_reference.reshape(rows, stimuli, 3), xyz_test.reshape(rows, stimuli, 3),
                                                    adapted, correction)
        out = {"delta_e_2000": delta_e.reshape(count, observers, stimuli),
               "metamerism_index": index.reshape(count, observers, stimuli)}
        if context.include_itp:
            if xyz_test is None:
                xyz_test = apply_matrices(drive, matrices, black)
            out["delta_e_itp"] = itp_difference(np.broadcast_to(context.xyz_reference, xyz_test.shape), xyz_test)
        return out


@blas_single_threaded
def design_arrays(context: SweepContext, test: Display) -> dict[str, np.ndarray]:
    """Every design's differences against the prepared reference as arrays (``test``: a Display
    with a ``design`` dim): ``delta_e_2000`` and ``metamerism_index`` (P, O, S), ``delta_e_white``
    (P, O), ``delta_e_2000_calibration`` (P, S) (CIE 2000 residual for the calibration observer),
    ``out_of_gamut`` (P, S) and, with ΔE_ITP, ``delta_e_itp`` (P, O, S); P designs, O observers,
    S stimuli. The values of :func:`metasim.mismatch` on the same designs."""
    block = _TestSide(context, test)
    return {**block.pairs(context), **block.rest(context)}


@blas_single_threaded
def design_statistics(context: SweepContext, test: Display, per_stimulus: bool = False,
                      raw: np.ndarray | None = None, differences: bool = False) -> dict[str, np.ndarray]:
    """Every design's summaries against the prepared reference, the pairs never stored.

    Returns (P designs, T thresholds, S stimuli, G age bands): ``delta_e_2000_overall``,
    ``metamerism_index_overall``, ``delta_e_white`` (and ``delta_e_itp_overall``) as (P, 4) mean,
    median, p95, max; ``share_of_observers_above_threshold`` (P, T, S) and
    ``share_of_pairs_above_threshold`` (P, T); with ages ``delta_e_2000_by_age`` (P, 4, G); with
    ``per_stimulus`` ``delta_e_2000_by_stimulus`` (P, 4, S); ``delta_e_2000_calibration_max`` and
    ``out_of_gamut_count`` (P,). Equal weights go through one
    compiled pass per block (:mod:`metasim.sweep._kernels.designs`); observer weights, ΔE_ITP or a
    design with NaN differences through the arrays of :func:`design_arrays` and numpy. ``raw``: the
    designs' spectra before white calibration (design, primary, wavelength), when ``test`` was made
    from them by :func:`metasim.sweep.run.chunk_display`: their distinct spectra are then
    integrated once (see :func:`_shared_primary_matrices`). ``differences``: also return the CIE 2000
    differences of every pair as ``differences`` (P, O, S), for the block's intervals.
    """
    block = _TestSide(context, test, raw)
    rest = block.rest(context)
    designs, observers, stimuli = block.designs, block.observers, block.stimuli
    out = {"delta_e_white": statistics_of_rows(rest["delta_e_white"], context.weights),
           "delta_e_2000_calibration_max": np.nanmax(rest["delta_e_2000_calibration"].reshape(designs, -1), axis=1),
           "out_of_gamut_count": rest["out_of_gamut"].sum(-1).astype(np.int64)}
    ages = context.side.observers.coords.variables["age_years"].values if context.bands is not None else None
    statistics = len(STATISTICS)
    general = np.ones(designs, dtype=bool)
    if context.weights is None:
        bands = context.bands
        band_of = np.full(observers, -1, dtype=np.int64)
        sizes = np.zeros(0, dtype=np.int64)
        if bands is not None:
            sizes = np.asarray(bands[1], dtype=np.int64)
            for g, inside in enumerate(bands[2]):
                band_of[inside] = g
        overall = np.full((designs, statistics), np.nan)
        overall_index = np.full((designs, statistics), np.nan)
        by_band = np.full((designs, statistics, sizes.size), np.nan)
        counts = np.zeros((designs, context.thresholds.size, stimuli), dtype=np.int64)
        by_stimulus = np.full((designs, statistics, stimuli if per_stimulus else 0), np.nan)
        flags = np.zeros(designs, dtype=np.int64)
        kept = np.empty((designs, observers, stimuli) if differences else (0, 0, 0))
        # writable C arrays: one argument type per parameter, one compiled version (metasim._warmup);
        # ranges of designs on the kernel threads
        run_in_parts(kernel_statistics, designs, writable(padded_drives(block.solution.drive)),
                     writable(block.matrices), writable(block.black), writable(block.adapted.reshape(-1, 3)),
                     context.reference_columns, context.adapted_white == "reference", writable(block.correction),
                     band_of, writable(sizes, np.int64), context.thresholds, bool(per_stimulus), overall,
                     overall_index, by_band, counts, by_stimulus, kept, flags)
        if differences:
            out["differences"] = kept
        share = counts / observers
        out.update({"delta_e_2000_overall": overall, "metamerism_index_overall": overall_index,
                    OBSERVER_SHARE: share, PAIR_SHARE: overall_shares(share)})
        if bands is not None:
            out["delta_e_2000_by_age"] = by_band
        if per_stimulus:
            out["delta_e_2000_by_stimulus"] = by_stimulus
        general = flags != 0
    if context.include_itp:
        general[:] = True
    if general.any():  # the arrays and the statistics layer's general route for these designs
        which = np.flatnonzero(general)
        pairs = block.pairs(context, which)
        if differences:
            if "differences" not in out:
                out["differences"] = np.empty((designs, observers, stimuli))
            out["differences"][which] = pairs["delta_e_2000"]
        delta_e = pairs["delta_e_2000"]
        share, share_overall, by_age, by_stimulus = band_and_stimulus_statistics(
            delta_e, context.weights, ages, context.age_bands, context.thresholds, per_stimulus)
        numbers = {"delta_e_2000_overall": pair_statistics(delta_e, context.weights),
                   "metamerism_index_overall": pair_statistics(pairs["metamerism_index"], context.weights),
                   OBSERVER_SHARE: share, PAIR_SHARE: share_overall}
        if by_age is not None:
            numbers["delta_e_2000_by_age"] = by_age
        if per_stimulus:
            numbers["delta_e_2000_by_stimulus"] = by_stimulus
        if "delta_e_itp" in pairs:
            numbers["delta_e_itp_overall"] = pair_statistics(pairs["delta_e_itp"], context.weights)
        for name, values in numbers.items():
            if name not in out:
                out[name] = np.full((designs, *values.shape[1:]), np.nan)
            out[name][which] = values
    return out


__all__ = ["SweepContext", "prepare", "design_arrays", "design_statistics"]
