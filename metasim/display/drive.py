"""Drive solving: linear drive values (0..1) of N primaries that reproduce target colours.

For the calibration observer the drives d must satisfy ``XYZ_black + M d = XYZ_target`` (M: the
3 × N matrix of primary XYZ). With N = 3 that fixes d; with N > 3 there is an (N − 3)-dimensional
family of solutions, and a *strategy* picks one, always within 0 ≤ d ≤ 1:

``min_norm``
    minimise Σ d_p².
``max_efficiency``
    maximum luminous efficiency: minimise the radiant power Σ d_p·Φ_p spent for the colour (the
    colour, hence its luminance, is fixed), i.e. maximise the luminous efficacy of the emitted
    light. Φ_p is each primary's integrated radiance at full drive (W·sr⁻¹·m⁻²) unless
    ``primary_power`` gives another cost per unit drive (for example electrical watts). Ties are
    broken towards the minimum norm (a 1e-6 quadratic term).
``population``
    minimum expected mismatch across an observer population against a reference rendering (a
    reference display driven for the same colours, or reference spectra): minimise the mean over
    observers o of ‖J_o (XYZ_o(d) − XYZ_o(reference))‖², where J_o is the Jacobian of CIELAB at
    the reference colour, relative to the reference white as seen by o. This is the CIELAB
    (ΔE*ab) mismatch linearised at the reference, which makes the problem a small exact QP per
    stimulus; report the true ΔE00 with :func:`metasim.colorimetry.delta_e_2000`.

Out-of-gamut targets (no d in the box reproduces them) are clipped, never silently: the drive
minimises the CIELAB-linearised distance to the target (calibration observer, Jacobian at the
target, display white as reference white), then the strategy picks among drives giving that
closest colour. The result flags them in ``out_of_gamut`` and reports ``residual_xyz`` and
``residual_delta_e`` (ΔE00). All of it is batched over ``design`` and stimuli
(:mod:`metasim.display.solvers`).

References
----------
Nocedal & Wright (2006) Numerical Optimization ch. 16 (QP); CIE 15:2004 §8.2 (CIELAB, whose
derivative gives J); Sharma, Wu & Dalal (2005) (ΔE00 of the residual).
"""

from __future__ import annotations

import inspect

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.colorimetry import tristimulus
from metasim.colorimetry.constants import CIELAB_EPSILON as _EPSILON
from metasim.colorimetry.constants import CIELAB_KAPPA as _KAPPA
from metasim.colorimetry.difference import delta_e_2000_array
from metasim.labelling import coordinates, labelled
from metasim.errors import DisplayError
from metasim.spectra import integrate
from metasim.display.model import Display, observer_name, resolve_observer, single_observer
from metasim.display.optics import observer_optics
from metasim.display._kernels.clip import clip_rows
from metasim.display.solvers import equality_box_qp
from metasim.display.sources import rgb_to_xyz, source_light
from metasim.display.transfer import check_transfer, eotf_inverse_values
from metasim.checks import current_spelling
from metasim.units import DELTA_E00

STRATEGIES = ("min_norm", "max_efficiency", "least_mismatch")
#: old names of strategies, still accepted for one release (metasim.checks.current_spelling)
RENAMED_STRATEGIES = {"population": "least_mismatch"}
_TIE_BREAK = 1e-6
_CLIP_WEIGHT = 1e-6
_FEASIBILITY = 1e-9
XYZ = ("X", "Y", "Z")


def lab_jacobian(xyz: np.ndarray, white: np.ndarray) -> np.ndarray:
    """∂(L*, a*, b*)/∂(X, Y, Z) at ``xyz`` (…, 3) relative to ``white`` (…, 3); returns (…, 3, 3).

    Plain numpy values (the drive solver's linearisation of CIELAB, used row by row).

    Parameters
    ----------
    xyz : ndarray (..., 3)
        X, Y, Z of the colours (any scale, the same as ``white``; last axis the ``xyz`` dim).
    white : ndarray (..., 3)
        X, Y, Z of the reference white, broadcast against ``xyz``.

    Returns
    -------
    ndarray (..., 3, 3)
        Rows L*, a*, b*, columns X, Y, Z: CIELAB units per unit of ``xyz``.

    References
    ----------
    CIE 15:2004 §8.2.1 (CIELAB with the exact ε = 216/24389, κ = 24389/27 of ISO/CIE 11664-4).

    Examples
    --------
    >>> import numpy as np
    >>> from metasim.display import lab_jacobian
    >>> lab_jacobian(np.array([20.0, 21.0, 22.0]), np.array([95.047, 100.0, 108.883])).round(3).tolist()
    [[0.0, 1.094, 0.0], [4.957, -4.717, 0.0], [0.0, 1.887, -1.778]]
    """
    t = xyz / white
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(t > _EPSILON, np.cbrt(np.maximum(t, _EPSILON)) ** -2 / 3.0, _KAPPA / 116.0)
    g = slope / white
    jac = np.zeros(xyz.shape + (3,))
    jac[..., 0, 1] = 116.0 * g[..., 1]
    jac[..., 1, 0] = 500.0 * g[..., 0]
    jac[..., 1, 1] = -500.0 * g[..., 1]
    jac[..., 2, 1] = 200.0 * g[..., 1]
    jac[..., 2, 2] = -200.0 * g[..., 2]
    return jac


def _lab(xyz: np.ndarray, white: np.ndarray) -> np.ndarray:
    t = xyz / white
    f = np.where(t > _EPSILON, np.cbrt(t), (_KAPPA * t + 16.0) / 116.0)
    return np.stack([116.0 * f[..., 1] - 16.0, 500.0 * (f[..., 0] - f[..., 1]), 200.0 * (f[..., 1] - f[..., 2])], -1)


def _clip(A, black, target, white, H_s, f_s, iterations: int = 12):
    """Drives in the box whose colour is closest in CIELAB (ΔE*ab) to out-of-gamut targets.

    Gauss-Newton on ‖Lab(black + A d) − Lab(target)‖² with box constraints, started from the
    CIELAB metric linearised at the white; a step is kept only if it lowers the distance. The
    strategy objective enters with a tiny weight so that ties resolve the same way as in gamut.
    All arrays are per row (R); colours are normalised so that the white has Y = 1. Each row is
    solved by the compiled :func:`metasim.display._kernels.clip.clip_rows`.
    """
    R, _, N = A.shape
    H_s = np.ascontiguousarray(np.broadcast_to(H_s, (R, N, N)), dtype=float)
    f_s = np.ascontiguousarray(np.broadcast_to(f_s, (R, N)), dtype=float)
    q_scale = np.maximum(np.maximum(np.trace(H_s, axis1=-2, axis2=-1) / N, np.abs(f_s).max(-1)), 1e-300)
    out = np.empty((R, N))
    if R:
        clip_rows(np.ascontiguousarray(A, dtype=float), np.ascontiguousarray(np.broadcast_to(black, (R, 3)), dtype=float),
                  np.ascontiguousarray(np.broadcast_to(target, (R, 3)), dtype=float),
                  np.ascontiguousarray(np.broadcast_to(white, (R, 3)), dtype=float),
                  H_s, f_s, q_scale, _CLIP_WEIGHT, iterations, 10 * N + 20, out)
    return out


def _calibration_observer(display: Display, observer):
    if observer is None:
        name = display.attrs.get("calibration_observer")
        if name is None:
            raise DisplayError("the display is not calibrated; pass observer=... (a standard name or observer Dataset)")
        try:
            return resolve_observer(str(name), display), str(name)
        except DisplayError:
            raise DisplayError(
                f"the display was calibrated for observer {name!r}, which is not a standard observer; pass observer=..."
            ) from None
    calibration_observer = single_observer(observer, display, "drive solving needs one calibration observer",
                          "pass the population as population=...")
    return calibration_observer, observer_name(observer)


def _flat(array: xr.DataArray, lead: list[str], tail: list[str]) -> np.ndarray:
    shape = [array.sizes[d] for d in lead] + [array.sizes[d] for d in tail]
    return array.transpose(*lead, *tail).values.reshape(shape)


def _population_objective(display, population, reference, reference_white, rgb_args, target,
                          observer, batch, stimulus_dims):
    """H (P, S, N, N) and f (P, S, N) of the linearised population mismatch."""
    pop = resolve_observer(population, display)
    if "observer" not in pop.dims:
        pop = pop.expand_dims(observer=[0])
    if reference is None:
        raise DisplayError("strategy='least_mismatch' needs reference=... (a reference Display or reference spectra)")
    if isinstance(reference, Display):
        if reference.batch_dims and set(reference.batch_dims) - set(batch):
            raise DisplayError(f"the reference display varies along {reference.batch_dims}; the test display along {batch}")
        ref_solution = solve_drive(reference, None if rgb_args else target, observer=observer, **(rgb_args or {}))
        ref_spectra = reference.render(ref_solution["drive"])
        white_spectrum = reference.white_spectrum()
    elif isinstance(reference, xr.DataArray):
        ref_spectra = reference
        white_spectrum = display.white_spectrum() if reference_white is None else reference_white
    else:
        raise DisplayError(f"reference must be a Display or spectra (DataArray), got {type(reference).__name__}")
    reference_xyz = tristimulus(ref_spectra, pop)
    ref_white = tristimulus(white_spectrum, pop)
    population_matrix = display.primary_tristimulus(pop)
    black_pop = display.black_tristimulus(pop)
    extra = [d for d in reference_xyz.dims if d not in (*batch, *stimulus_dims, "observer", "xyz")]
    if extra:
        raise DisplayError(f"reference spectra have dims {extra} that the targets lack; they must share the stimulus dims")
    template = xr.broadcast(reference_xyz, population_matrix.isel(primary=0, drop=True),
                            target.isel(xyz=0, drop=True).expand_dims(observer=pop.sizes["observer"]) * 0)[0]
    r = _flat(template, [*batch, *stimulus_dims], ["observer", "xyz"])
    white = _flat(ref_white.broadcast_like(population_matrix.isel(primary=0, drop=True)), batch, ["observer", "xyz"])
    m = _flat(population_matrix, batch, ["observer", "xyz", "primary"])
    black_xyz = _flat(black_pop.broadcast_like(population_matrix.isel(primary=0, drop=True)), batch, ["observer", "xyz"])
    P, n_observers, N = int(np.prod([population_matrix.sizes[d] for d in batch], dtype=int)), pop.sizes["observer"], display.n_primaries
    r = r.reshape(P, -1, n_observers, 3)
    m = m.reshape(P, n_observers, 3, N)
    white = white.reshape(P, n_observers, 3)
    black_xyz = black_xyz.reshape(P, n_observers, 3)
    jac = lab_jacobian(r, white[:, None])  # (P, S, n_observers, 3, 3)
    g = np.einsum("psoij,pojn->psoin", jac, m)
    resid0 = np.einsum("psoij,psoj->psoi", jac, r - black_xyz[:, None])
    H = np.einsum("psoin,psoil->psnl", g, g) / n_observers
    f = -np.einsum("psoin,psoi->psn", g, resid0) / n_observers
    return H, f


def solve_drive(display: Display, target: xr.DataArray | None = None, **options) -> xr.Dataset:
    """Drive values (0..1) that reproduce target colours on a display, for its calibration observer.

    Parameters
    ----------
    display : Display
        With or without a ``design`` dim.
    target : DataArray, optional
        Target XYZ in cd/m² (dim ``xyz`` plus stimulus dims, e.g. ``stimulus``; may vary by
        ``design``). Give either ``target``, or ``rgb``, or (with a spectral ``reference``) neither,
        in which case the reference spectra's XYZ are the targets.
    rgb : DataArray, optional
        Encoded source RGB (dim ``primary`` = R, G, B), decoded by
        :func:`metasim.display.sources.rgb_to_xyz` with ``source`` and ``encoding``; SDR white maps
        to the display white, HLG uses the display's peak luminance.
    observer : str or Dataset, optional
        The calibration observer (default: the one the display was calibrated for).
    strategy : {"min_norm", "max_efficiency", "least_mismatch"}
        How to use the freedom of N > 3 primaries (module docstring).
    population : Dataset, optional
        Observer population (``cmf`` with an ``observer`` dim) for ``strategy="least_mismatch"`` (the
        least linearised mismatch over the population; its old name ``"population"`` still works for
        one release).
    reference : Display or DataArray, optional
        The reference rendering for ``population``: a Display (driven for the same targets, its
        own strategy ``min_norm``) or reference spectra (stimulus dims × ``wavelength``).
    reference_white : DataArray, optional
        White spectrum the observers adapt to with reference spectra (default: display white).
    primary_power : DataArray, optional
        Cost per unit drive of each primary (dim ``primary``) for ``max_efficiency``.

    Returns
    -------
    Dataset
        ``drive`` (…, primary, units 1), ``signal`` (encoded drive for the display's transfer
        function), ``reproduced`` (achieved XYZ, cd/m²), ``target``, ``residual_xyz``, ``residual_delta_e``
        (ΔE00 achieved vs target, display white as reference white) and ``out_of_gamut`` (bool).

    References
    ----------
    See the module docstring.

    Examples
    --------
    >>> import metasim
    >>> import xarray as xr
    >>> from metasim.emitters import gaussian
    >>> display = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> rgb = xr.DataArray([[1.0, 1.0, 1.0], [0.5, 0.5, 0.5]], dims=("stimulus", "primary"),
    ...                    coords={"stimulus": ["white", "grey"], "primary": ["R", "G", "B"]})
    >>> metasim.solve_drive(display, rgb=rgb)["drive"].sel(stimulus="white").round(6).values.tolist()
    [1.0, 1.0, 1.0]
    """
    return drive_solution(display, target, **options).dataset()


def drive_solution(
    display: Display,
    target: xr.DataArray | None = None,
    *,
    rgb: xr.DataArray | None = None,
    source: str = "bt709",
    encoding: str | None = None,
    observer=None,
    strategy: str = "min_norm",
    population=None,
    reference=None,
    reference_white: xr.DataArray | None = None,
    primary_power: xr.DataArray | None = None,
) -> "DriveSolution":
    """The work of :func:`solve_drive`, kept as numpy values (:class:`DriveSolution`); the Dataset
    is built only when asked for."""
    if not isinstance(display, Display):
        raise DisplayError(f"solve_drive needs a Display, got {type(display).__name__}")
    strategy = current_spelling(strategy, RENAMED_STRATEGIES, "strategy", stacklevel=4)
    if strategy not in STRATEGIES:
        raise DisplayError(f"strategy={strategy!r} is not known; allowed: {', '.join(STRATEGIES)}")
    calibration_observer, calibration_name = _calibration_observer(display, observer)
    spectra = display.spectra
    batch = display.batch_dims
    batch_sizes = {d: spectra.sizes[d] for d in batch}
    P = int(np.prod(list(batch_sizes.values()), dtype=int))
    N = spectra.sizes["primary"]
    responses, primaries, black_xyz, white = observer_optics(display, calibration_observer)
    y_white = white[:, 1]
    coord_sources = [spectra, display.black, responses]
    rgb_args = None
    if rgb is not None:
        if target is not None:
            raise DisplayError("give either target (XYZ) or rgb (source signals), not both")
        rgb_args = {"rgb": rgb, "source": source, "encoding": encoding}
        light, relative, matrix, light_dims = source_light(rgb, source, encoding,
                                                           peak_luminance=float(display.peak_luminance.values.max()))
        light, stimulus_dims, stimulus_shape = _layout(xr.Variable((*light_dims, "primary"), light), rgb, spectra, batch_sizes,
                                          "primary")
        if light is None:  # labels of a shared batch dim differ: the xarray route
            target = rgb_to_xyz(rgb, source, encoding=encoding,
                                white_luminance=_labelled_white(white, batch_sizes, coord_sources).sel(xyz="Y", drop=True),
                                peak_luminance=float(display.peak_luminance.max()))
        else:
            light = light.reshape(P, -1, 3)
            if relative:
                light = light * y_white[:, None, None]
            t_abs = np.einsum("xp,...p->...x", matrix, light)
            coord_sources = [rgb, *coord_sources]
    elif target is None:
        if not isinstance(reference, xr.DataArray):
            raise DisplayError("give target (XYZ in cd/m2), rgb (source signals) or reference spectra")
        target = tristimulus(reference, calibration_observer)
    if target is not None:
        if not isinstance(target, xr.DataArray) or "xyz" not in target.dims:
            raise DisplayError("target must be a DataArray with an 'xyz' dim (X, Y, Z in cd/m2)")
        if not np.isfinite(target.values).all():
            raise DisplayError("target XYZ must be finite numbers (cd/m2)")
        if target.sizes["xyz"] != 3:
            target.assign_coords(xyz=["X", "Y", "Z"])  # raises xarray's error for the wrong size
        values, stimulus_dims, stimulus_shape = _layout(target.variable, target, spectra, batch_sizes, "xyz")
        if values is None:  # labels of a shared batch dim differ: align as xarray does
            template = _labelled_white(white, batch_sizes, coord_sources)
            target_b = target.assign_coords(xyz=["X", "Y", "Z"]).broadcast_like(template)
            values = target_b.transpose(*batch, *stimulus_dims, "xyz").values
            stimulus_shape = [target_b.sizes[d] for d in stimulus_dims]
            coord_sources = [target_b]
        else:
            coord_sources = [target, *coord_sources]
        t_abs = values.reshape(P, -1, 3)
    elif not np.isfinite(t_abs).all():
        raise DisplayError("target XYZ must be finite numbers (cd/m2)")
    S = t_abs.shape[1]
    dims = (*batch, *stimulus_dims)
    base = coordinates(dims, coord_sources)
    if len(coord_sources) > 1:  # xarray's alignment would keep the display's labels of its batch dims
        base = _prefer(base, spectra, batch)
    A = primaries / y_white[:, None, None]
    b = (t_abs - black_xyz[:, None]) / y_white[:, None, None]

    if strategy == "min_norm":
        H = np.broadcast_to(np.eye(N), (P, 1, N, N))
        f = np.zeros((P, S, N))
    elif strategy == "max_efficiency":
        power = integrate(spectra) if primary_power is None else primary_power
        power = _flat(power.broadcast_like(spectra.isel(wavelength=0, drop=True)), batch, ["primary"]).reshape(P, N)
        if (power < 0).any() or not np.isfinite(power).all():
            raise DisplayError("primary_power must be finite and >= 0 for every primary")
        H = np.broadcast_to(_TIE_BREAK * np.eye(N), (P, 1, N, N))
        f = np.broadcast_to((power / power.max(-1, keepdims=True))[:, None, :], (P, S, N)).copy()
    else:
        if target is None:
            target = labelled(t_abs.reshape([*batch_sizes.values(), *stimulus_shape, 3]), (*dims, "xyz"), [base],
                              labels={"xyz": XYZ})
        H, f = _population_objective(display, population, reference, reference_white, rgb_args,
                                     target.assign_coords(xyz=["X", "Y", "Z"]), calibration_observer, batch, stimulus_dims)
        H = H.reshape(P, S, N, N)
        f = f.reshape(P, S, N)
        norm = np.trace(H, axis1=-2, axis2=-1)[..., None] / N
        norm = np.where(norm > 0, norm, 1.0)
        H = H / norm[..., None] + 1e-9 * np.eye(N)
        f = f / norm

    lo, hi = np.zeros(N), np.ones(N)
    drive, inside = equality_box_qp(H, f, A, b, lo, hi, tol=_FEASIBILITY)
    outside = ~inside
    if outside.any():
        p_idx, s_idx = np.nonzero(outside)
        white_n = white / y_white[:, None]
        H_s = H[p_idx, s_idx if H.shape[1] > 1 else 0]
        f_s = f[p_idx, s_idx]
        clipped = _clip(A[p_idx], black_xyz[p_idx] / y_white[p_idx, None], t_abs[p_idx, s_idx] / y_white[p_idx, None],
                        white_n[p_idx], H_s, f_s)
        # among drives giving the closest colour, take the strategy's choice (same batched solver)
        columns, position = np.unique(s_idx, return_inverse=True)
        b_again = b[:, columns].copy()
        b_again[p_idx, position] = np.einsum("rmn,rn->rm", A[p_idx], clipped)
        again, ok = equality_box_qp(H[:, columns] if H.shape[1] > 1 else H, f[:, columns], A, b_again, lo, hi,
                                    tol=1e-7)
        drive[p_idx, s_idx] = np.where(ok[p_idx, position, None], again[p_idx, position], clipped)

    achieved = black_xyz[:, None] + np.einsum("pmn,psn->psm", A, drive) * y_white[:, None, None]
    return DriveSolution(display, drive, achieved, t_abs, outside, white, batch, dims,
                         [*batch_sizes.values(), *stimulus_shape], base, strategy, calibration_name)


# solve_drive takes drive_solution's keywords (one list, written once); help() shows them
solve_drive.__signature__ = inspect.signature(drive_solution).replace(return_annotation="xr.Dataset")


def _prefer(coords: xr.Coordinates, spectra: xr.DataArray, batch) -> xr.Coordinates:
    """``coords`` with the display's own labels for its batch dims."""
    swap = [d for d in batch if d in spectra.xindexes and d in coords.xindexes]
    if not swap:
        return coords
    variables, indexes = dict(coords.variables), dict(coords.xindexes)
    for d in swap:
        variables[d] = spectra.coords.variables[d]
        indexes[d] = spectra.xindexes[d]
    return xr.Coordinates(variables, indexes=indexes)


def _layout(variable: xr.Variable, array: xr.DataArray, spectra: xr.DataArray, batch_sizes: dict, last: str):
    """Values of ``variable`` (the data of ``array``) as (*batch, *stimulus dims, last), the stimulus
    dims and their sizes; values None when a batch dim shared with the display carries other labels
    (then xarray must align)."""
    stimulus_dims = [d for d in variable.dims if d != last and d not in batch_sizes]
    stimulus_shape = [variable.sizes[d] for d in stimulus_dims]
    for d in set(batch_sizes) & set(array.dims):
        if array.sizes[d] != batch_sizes[d] or (
                d in array.xindexes and d in spectra.xindexes and not array.xindexes[d].equals(spectra.xindexes[d])):
            return None, stimulus_dims, stimulus_shape
    shape = {**batch_sizes, **dict(zip(stimulus_dims, stimulus_shape)), last: variable.sizes[last]}
    return np.asarray(variable.set_dims(shape).values), stimulus_dims, stimulus_shape


def _labelled_white(white: np.ndarray, batch_sizes: dict, sources) -> xr.DataArray:
    """The display white XYZ as a labelled (*batch, xyz) DataArray (for the xarray fallbacks)."""
    return labelled(white.reshape([*batch_sizes.values(), 3]), (*batch_sizes, "xyz"), sources, labels={"xyz": XYZ},
                    attrs={"units": "cd m-2"})


def _signal_values(display: Display, drive: np.ndarray, batch, P: int) -> np.ndarray | None:
    """Display.encode of drives (P, S, N) on numpy values; None if the peak luminance varies along
    dims the display's spectra lack (then the labelled route applies)."""
    peak_da = display.peak_luminance
    if set(peak_da.dims) - set(batch):
        return None
    peak_max = float(peak_da.values.max())
    transfer, gamma, black = display.transfer, display.gamma, display.black_luminance
    if transfer in ("pq", "hlg"):
        peak = np.asarray(peak_da.variable.set_dims({d: display.spectra.sizes[d] for d in batch}).values).reshape(P)
        light = drive * peak[:, None, None]
        check_transfer(transfer, gamma=gamma, peak_luminance=peak_max, black_luminance=black)
        weights = None
        if transfer == "hlg":
            w = display.luminance_weights()
            if set(w.dims) - {*batch, "primary"}:
                return None
            weights = np.asarray(w.variable.set_dims({**{d: display.spectra.sizes[d] for d in batch},
                                                      "primary": display.n_primaries}).values)
            weights = weights.reshape(P, 1, display.n_primaries)
    else:
        light, peak_max, black = drive, 1.0, black / peak_max
        check_transfer(transfer, gamma=gamma, peak_luminance=1.0, black_luminance=black)
        weights = None
    if not np.isfinite(light).all():
        raise DisplayError("light contains non-finite values; values must be finite numbers")
    return eotf_inverse_values(light, transfer, peak_max, black, gamma, weights)


class DriveSolution:
    """A drive solution as numpy values over (P, S): P the display's designs, S the stimuli.

    ``drive`` (P, S, N), ``reproduced`` and ``target`` (P, S, 3) in cd/m², ``out_of_gamut`` (P, S),
    ``white`` (P, 3); :meth:`variable` gives one of them with its dims, :meth:`dataset` the
    labelled result of :func:`solve_drive`.
    """

    def __init__(self, display, drive, achieved, t_abs, outside, white, batch, dims, sizes, base, strategy, observer):
        if (white <= 0).any():
            raise DisplayError("the white must have X, Y, Z > 0 to define CIELAB")
        self.display, self.drive, self.reproduced, self.target = display, drive, achieved, t_abs
        self.out_of_gamut, self.white, self.batch, self.dims = outside, white, list(batch), tuple(dims)
        self.sizes, self.base, self.strategy, self.observer = list(sizes), base, strategy, observer
        self._residual = None

    @property
    def residual_delta_e(self) -> np.ndarray:
        """ΔE00 of reproduced vs target (display white as reference white), (P, S)."""
        if self._residual is None:
            self._residual = delta_e_2000_array(_lab(self.reproduced, self.white[:, None]),
                                                _lab(self.target, self.white[:, None]))
        return self._residual

    def variable(self, name: str) -> xr.Variable:
        """``drive``, ``reproduced``, ``target``, ``out_of_gamut`` or ``residual_delta_e`` with its dims."""
        values = {"drive": (self.drive, "primary"), "reproduced": (self.reproduced, "xyz"),
                  "target": (self.target, "xyz"), "out_of_gamut": (self.out_of_gamut, None),
                  "residual_delta_e": (self.residual_delta_e, None)}[name]
        array, last = values
        if last is None:
            return xr.Variable(self.dims, array.reshape(self.sizes))
        return xr.Variable((*self.dims, last), array.reshape(self.sizes + [array.shape[-1]]))

    def coords(self) -> xr.Coordinates:
        spectra = self.display.spectra
        primary = xr.Coordinates({"primary": spectra.coords.variables["primary"]},
                                 indexes={"primary": spectra.xindexes["primary"]})
        return coordinates((*self.dims, "primary", "xyz"), (self.base, primary), labels={"xyz": XYZ})

    def dataset(self) -> xr.Dataset:
        """The labelled solution (see :func:`solve_drive`)."""
        display, dims, sizes, drive = self.display, self.dims, self.sizes, self.drive
        N = drive.shape[-1]
        coords = self.coords()
        signal = _signal_values(display, drive, self.batch, drive.shape[0])
        if signal is None:
            drive_da = xr.DataArray(drive.reshape(sizes + [N]), dims=(*dims, "primary"), coords=coords)
            signal = display.encode(drive_da).transpose(*dims, "primary").values
        xyz_attrs = {"units": "cd m-2"}
        achieved, t_abs = self.reproduced, self.target
        return xr.Dataset(
            {
                "drive": ((*dims, "primary"), drive.reshape(sizes + [N]),
                          {"units": "1", "long_name": "linear drive value"}),
                "signal": ((*dims, "primary"), np.reshape(signal, sizes + [N]),
                           {"units": "1", "long_name": f"encoded drive signal ({display.transfer})"}),
                "reproduced": ((*dims, "xyz"), achieved.reshape(sizes + [3]),
                               {**xyz_attrs, "long_name": "reproduced tristimulus values"}),
                "target": ((*dims, "xyz"), t_abs.reshape(sizes + [3]),
                           {**xyz_attrs, "long_name": "target tristimulus values"}),
                "residual_xyz": ((*dims, "xyz"), (achieved - t_abs).reshape(sizes + [3]),
                                 {**xyz_attrs, "long_name": "reproduced minus target tristimulus values"}),
                "residual_delta_e": (dims, self.residual_delta_e.reshape(sizes), {
                    "units": DELTA_E00, "long_name": "CIE 2000 colour difference, reproduced vs target (display white)"}),
                "out_of_gamut": (dims, self.out_of_gamut.reshape(sizes),
                                 {"long_name": "target outside the display gamut (clipped)", "units": "1"}),
            },
            coords=coords,
            attrs={"model": "drive decomposition", "strategy": self.strategy, "observer": self.observer,
                   "display": display.name, "metasim_version": __version__},
        )


__all__ = ["STRATEGIES", "DriveSolution", "drive_solution", "lab_jacobian", "solve_drive"]
