"""Compiled helper kernels against numpy (reference library) and position independence."""

import os
import subprocess
import sys

import numpy as np
import pytest

from metasim._threads import _controller, single_threaded_blas
from metasim.colorimetry.cielab import lab_of_ratio
from metasim.colorimetry.difference import delta_e_2000_array
from metasim.colorimetry.integration import apply_matrices, spectral_products
from metasim.statistics.sorted_rows import observer_stimulus_stats, row_stats


def test_spectral_products_equal_numpy_and_do_not_depend_on_shape():
    rng = np.random.default_rng(1)
    a, b = rng.uniform(0, 1, (300, 401)), rng.uniform(0, 1, (7, 401))
    full = spectral_products(a, b)
    np.testing.assert_allclose(full, a @ b.T, rtol=1e-13)  # numpy matmul as reference
    assert np.array_equal(spectral_products(a[17:20], b), full[17:20])  # same bits in any batch
    assert np.array_equal(spectral_products(a, b[2:3]), full[:, 2:3])
    assert np.array_equal(spectral_products(b, a), full.T)


def test_apply_matrices_equal_numpy():
    rng = np.random.default_rng(2)
    drive, m, black = rng.uniform(0, 1, (2, 9, 4)), rng.uniform(0, 1, (2, 5, 3, 4)), rng.uniform(0, 1, (2, 5, 3))
    expected = np.einsum("gsn,gokn->gosk", drive, m) + black[:, :, None, :]  # numpy einsum as reference
    np.testing.assert_allclose(apply_matrices(drive, m, black), expected, rtol=1e-14)


def test_row_and_summary_stats_equal_numpy():
    rng = np.random.default_rng(3)
    values = np.round(rng.gamma(2.0, 1.0, (40, 301)), 2)  # with ties
    stats, shares = row_stats(values, (1.0, 2.0))
    expected = np.stack([values.mean(1), np.quantile(values, 0.5, axis=1), np.quantile(values, 0.95, axis=1),
                         values.max(1)])  # numpy mean / quantile (linear) / max as reference
    np.testing.assert_allclose(stats, expected, rtol=1e-13)
    np.testing.assert_allclose(shares, [(values > 1.0).mean(1), (values > 2.0).mean(1)])
    by_column, column_shares = row_stats(values.T, (1.0, 2.0), axis=0)  # the same rows, stored as columns
    np.testing.assert_allclose(by_column, expected, rtol=1e-13)
    np.testing.assert_array_equal(column_shares, shares)
    segments = [np.array([3]), np.arange(5, 40, 2)]
    by_stimulus, by_stimulus_shares, by_observer, by_segment = observer_stimulus_stats(values.T, (1.0, 2.0), segments)
    np.testing.assert_allclose(by_stimulus, expected, rtol=1e-13)  # values.T: observers 301, stimuli 40
    np.testing.assert_array_equal(by_stimulus_shares, shares)
    np.testing.assert_allclose(by_observer, np.stack([values.mean(0), np.median(values, 0),
                                                      np.percentile(values, 95, axis=0), values.max(0)]), rtol=1e-13)
    pairs = values.T[segments[1]].ravel()
    np.testing.assert_allclose(by_segment[:, 1], [pairs.mean(), np.median(pairs), np.percentile(pairs, 95),
                                                  pairs.max()], rtol=1e-13)
    np.testing.assert_allclose(by_segment[:, 0], [values.T[3].mean(), np.median(values.T[3]),
                                                  np.percentile(values.T[3], 95), values.T[3].max()], rtol=1e-13)


@pytest.mark.parametrize("n", [1, 7, 17, 2047, 2049])
def test_delta_e_and_lab_do_not_depend_on_position(n):
    rng = np.random.default_rng(4)
    lab_1 = np.column_stack([rng.uniform(0, 100, 4096), rng.uniform(-100, 100, 4096), rng.uniform(-100, 100, 4096)])
    lab_2 = lab_1 + rng.normal(0, 3, lab_1.shape)
    assert np.array_equal(delta_e_2000_array(lab_1[-n:], lab_2[-n:]), delta_e_2000_array(lab_1, lab_2)[-n:])
    ratio = rng.uniform(0, 1.2, (4096, 3))
    assert np.array_equal(lab_of_ratio(ratio[-n:]), lab_of_ratio(ratio)[-n:])


def test_single_threaded_blas_restores_the_count_and_nests():
    def counts():
        return [info["num_threads"] for info in _controller().info() if info["user_api"] == "blas"]

    before = counts()
    with single_threaded_blas():
        with single_threaded_blas():
            assert all(c == 1 for c in counts())
        assert all(c == 1 for c in counts())
    assert counts() == before


@pytest.mark.parametrize("n", [3, 4, 5, 6])
def test_compiled_equality_qp_equals_the_batched_numpy_solver(n):
    from metasim.display.solvers import equality_box_qp

    rng = np.random.default_rng(n)
    P, S = 2, 300
    A = rng.uniform(0.05, 1.0, (P, 3, n))
    b = np.einsum("pmn,psn->psm", A, rng.uniform(-0.2, 1.1, (P, S, n)))  # some targets out of reach
    f = rng.normal(0, 0.3, (P, S, n))
    H = np.broadcast_to(np.eye(n) + 0.1, (P, 1, n, n))
    shared = equality_box_qp(H, f, A, b, np.zeros(n), np.ones(n))  # compiled rows (one H per design)
    per_row = equality_box_qp(np.ascontiguousarray(np.broadcast_to(H, (P, S, n, n))), f, A, b, np.zeros(n),
                              np.ones(n))  # numpy path (H per stimulus): the other implementation
    np.testing.assert_array_equal(shared[1], per_row[1])
    assert 0 < shared[1].sum() < shared[1].size
    np.testing.assert_allclose(shared[0], per_row[0], atol=1e-9)


def test_keep_freed_memory_is_a_switch(monkeypatch):
    from metasim._memory import keep_freed_memory

    monkeypatch.setenv("METASIM_KEEP_FREED_MEMORY", "0")
    assert keep_freed_memory() is False  # turned off by the environment, nothing changed
    monkeypatch.delenv("METASIM_KEEP_FREED_MEMORY")
    assert isinstance(keep_freed_memory(), bool)  # True under glibc, False elsewhere


def test_driven_pairs_equal_apply_matrices_then_pair_differences():
    from metasim.colorimetry.fused import driven_pair_differences, pair_differences
    from metasim.colorimetry.integration import apply_matrices

    rng = np.random.default_rng(8)
    G, n_obs, S = 2, 5, 37
    ref_drive, test_drive = rng.uniform(0, 1, (1, S, 3)), rng.uniform(0, 1, (G, S, 4))
    ref_m, ref_b = rng.uniform(0, 40, (1, n_obs, 3, 3)), rng.uniform(0, 0.1, (1, n_obs, 3))
    test_m, test_b = rng.uniform(0, 40, (G, n_obs, 3, 4)), rng.uniform(0, 0.1, (G, n_obs, 3))
    white = rng.uniform(80, 120, (G * n_obs, 3))
    correction = np.where(rng.uniform(size=(G, S, 1)) < 0.3, rng.normal(0, 0.5, (G, S, 3)), 0.0)
    xyz_r, xyz_t, *rest = driven_pair_differences(ref_drive, ref_m, ref_b, test_drive, test_m, test_b, white,
                                                  correction)
    # the same pass done in two steps (the separate kernels; no outside reference needed)
    assert np.array_equal(xyz_r, apply_matrices(ref_drive, ref_m, ref_b)[0])
    assert np.array_equal(xyz_t, apply_matrices(test_drive, test_m, test_b))
    two_steps = pair_differences(np.broadcast_to(xyz_r, xyz_t.shape).reshape(G * n_obs, S, 3), xyz_t.reshape(G * n_obs, S, 3),
                                 white, correction)
    for fused, separate in zip(rest, two_steps):
        assert np.array_equal(fused, separate)
    index, delta_e = rest[3], rest[2]
    untouched = (correction == 0).all(-1)  # (G, S)
    assert np.array_equal(index.reshape(G, n_obs, S)[:, :, untouched[0]][0], delta_e.reshape(G, n_obs, S)[0][:, untouched[0]])


def test_series_equal_libm():
    from metasim.colorimetry._kernels.series import atan2, cbrt_folded, exp_negative, sin_reduced

    rng = np.random.default_rng(5)
    for y, x in rng.normal(0, 50, (200, 2)):
        assert abs(atan2(y, x) - np.arctan2(y, x)) <= 4e-16 * np.pi  # numpy (libm) as reference
    for t in np.r_[0.0, rng.uniform(0, 45, 200)]:
        # six squarings multiply the rounding of exp(-t/64) by up to 64
        assert abs(exp_negative(t) - np.exp(-t)) <= 1e-14  # numpy (libm) as reference
    for x in rng.uniform(0, np.pi / 3, 200):
        assert abs(sin_reduced(x) - np.sin(x)) <= 2e-16  # numpy (libm) as reference
    for t in np.r_[8.0**-4, 8.0**8, 10.0 ** rng.uniform(-3.5, 7, 200)]:
        assert abs(cbrt_folded(t) / np.cbrt(t) - 1.0) <= 1e-15  # numpy (libm) as reference


def test_compiled_code_lives_in_kernel_packages():
    # common practice, no source: the fence of DEVELOPERS.md ("Compiled code is fenced off")
    import pathlib

    import metasim

    root = pathlib.Path(metasim.__file__).parent
    outside = [str(path.relative_to(root)) for path in root.rglob("*.py")
               if "_kernels" not in path.parts
               and any(mark in path.read_text() for mark in ("@numba.", "numba.njit", "@intrinsic", "@njit"))]
    assert outside == []


def test_study_kernels_pass_no_integer_constants_to_compiled_helpers():
    # common practice, no source: numba types an integer constant argument as its own literal type
    # and compiles the called helper once more for each constant value (seconds each on a first run);
    # kernels pass np.int64(...) or variables instead (helpers inlined at numba's level excepted)
    import ast
    import pathlib

    import metasim
    from metasim import _warmup

    root = pathlib.Path(metasim.__file__).parent
    paths = {root.joinpath(*name.split(":")[0].split(".")[1:]).with_suffix(".py")
             for group in _warmup.STUDY for name in group}
    trees = {path: ast.parse(path.read_text()) for path in root.rglob("_kernels/*.py")}
    compiled = {node.name for tree in trees.values() for node in ast.walk(tree)
                if isinstance(node, ast.FunctionDef)
                and any("njit" in ast.unparse(d) for d in node.decorator_list)
                and not any(k.arg == "inline" and getattr(k.value, "value", None) == "always"
                            for d in node.decorator_list if isinstance(d, ast.Call) for k in d.keywords)}

    def integer(node):
        return isinstance(node, ast.Constant) and type(node.value) is int

    found = []
    for path in sorted(paths):
        for function in (n for n in ast.walk(trees[path]) if isinstance(n, ast.FunctionDef)):
            constants = {t.id for a in ast.walk(function) if isinstance(a, ast.Assign) and integer(a.value)
                         for t in a.targets if isinstance(t, ast.Name)}
            for call in ast.walk(function):
                if isinstance(call, ast.Call) and isinstance(call.func, ast.Name) and call.func.id in compiled:
                    found += [f"{path.name}:{call.lineno} {ast.unparse(call)}" for arg in call.args
                              if integer(arg) or (isinstance(arg, ast.Name) and arg.id in constants)]
    assert found == []
    assert len(paths) >= 6  # the study's kernel modules were read


@pytest.mark.parametrize("n", [1, 7, 8, 129, 255, 256, 300, 4097, 32000])
def test_unsorted_row_summaries_equal_numpy_bit_for_bit(n):
    from metasim.statistics._kernels.order import numpy_sum
    from metasim.statistics.selection import row_statistics

    rng = np.random.default_rng(n)
    rows = rng.gamma(1.5, 2.0, (6, n))
    rows[1] = np.round(rows[1], 1)  # many ties
    rows[2, : n // 2] = 0.0  # a block of zeros (black stimuli)
    rows[3] = 2.5  # all equal
    rows[4] *= 1e-12  # tiny values
    rows[5, 0] = 1e6  # one outlier stretching the range
    stats = row_statistics(rows)
    # numpy's mean, linear quantile and max as reference
    expected = np.stack([rows.mean(1), np.quantile(rows, 0.5, axis=1), np.quantile(rows, 0.95, axis=1), rows.max(1)], 1)
    np.testing.assert_array_equal(stats, expected)
    assert all(numpy_sum(row, 0, n) == np.add.reduce(row) for row in rows)  # numpy's pairwise sum, same order


@pytest.mark.parametrize("case", ["gamma", "ties", "zeros", "equal", "outlier"])
def test_grouped_summaries_equal_numpy_for_every_set(case):
    from metasim.statistics._kernels.order import summarise_groups

    rng = np.random.default_rng(len(case))
    rows, row, groups = 40, 16, 4
    values = rng.gamma(1.5, 2.0, rows * row)
    if case == "ties":
        values = np.round(values, 1)
    elif case == "zeros":
        values[: values.size // 2] = 0.0
    elif case == "equal":
        values[:] = 2.5
    elif case == "outlier":
        values[7] = 1e6
    group_of = rng.integers(-1, groups - 1, rows)  # rows in no group; the last group empty
    positions = np.sort(rng.choice(values.size, 25, replace=False)).astype(np.int64)
    replacement = values[positions] + rng.gamma(1.0, 3.0, positions.size)
    overall, by_group, changed = np.full(4, np.nan), np.full((4, groups), np.nan), np.full(4, np.nan)
    summarise_groups(values, group_of, row, positions, replacement, True, overall, by_group, changed)

    def expected(x):  # numpy's linear quantiles and maximum as reference
        return [np.quantile(x, 0.5), np.quantile(x, 0.95), x.max()]

    np.testing.assert_array_equal(overall[1:], expected(values))
    for g in range(groups):
        members = values.reshape(rows, row)[group_of == g].ravel()
        if members.size:
            np.testing.assert_array_equal(by_group[1:, g], expected(members))
        else:
            assert np.isnan(by_group[1:, g]).all()
    second = values.copy()
    second[positions] = replacement
    np.testing.assert_array_equal(changed[1:], expected(second))


def test_a_study_calls_each_kernel_with_its_declared_types():
    # common practice, no source: the helper processes compile the declared types, so a study must
    # call exactly those (else it would compile a second version itself)
    from metasim import _warmup, mismatch, observer_population
    from metasim._paths import data_dir
    from metasim.cli.specs import load_display
    from metasim.metamerism.stimuli import combine, neutral_ramp, primaries_and_secondaries
    from metasim.statistics import population_statistics

    demo = data_dir() / "demo"
    reference, _ = load_display(demo / "grading_monitor.toml")
    test, _ = load_display(demo / "projector_four_laser.toml")
    observers = observer_population(4, seed=3, wavelengths=test.wavelengths.values)
    stimuli = combine(neutral_ramp(3, source="bt2020"), primaries_and_secondaries(source="bt2020"))  # some clipped
    result = mismatch(reference, test, observers, stimuli)
    assert bool(result["out_of_gamut_test"].any())  # the clipping kernel ran
    population_statistics(result["delta_e_2000"], interval=True, resamples=200)  # the interval kernels
    from metasim.colorimetry.cielab import xyz_to_lab_array

    xyz_to_lab_array(np.ones((2, 3, 3)), np.ones((2, 1, 3)))  # one white per observer (calibration ranking)
    for name in (name for group in _warmup.STUDY for name in group):
        dispatcher, signature = _warmup._kernel(name)
        assert list(dispatcher.overloads) == [_warmup._argument_types(signature)], name


def test_helper_processes_fill_an_empty_kernel_cache(tmp_path):
    # common practice, no source: a helper compiles into NUMBA_CACHE_DIR and the run then finds it
    name = "metasim.statistics._kernels.rowstats:_sorted_rows"
    script = ("import sys\nfrom metasim import _warmup\nbefore = _warmup.is_cached(sys.argv[1])\n"
              "started = _warmup.start([[sys.argv[1]]])\ncompiled = []\n_warmup.on_compile(lambda: compiled.append(1))\n"
              "import numpy as np\nfrom metasim.statistics.sorted_rows import row_stats\n"
              "row_stats(np.arange(12.0).reshape(3, 4))\n"
              "print(before, started, _warmup.is_cached(sys.argv[1]), len(compiled))\n")
    env = dict(os.environ, NUMBA_CACHE_DIR=str(tmp_path / "cache"), NUMBA_NUM_THREADS="2")
    done = subprocess.run([sys.executable, "-c", script, name], env=env, capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr
    assert done.stdout.split() == ["False", "True", "True", "0"]  # compiled by the helper only
    assert any((tmp_path / "cache").rglob("*sorted_rows*.nbi"))


def test_the_command_says_when_it_compiles(monkeypatch):
    # common practice, no source: the note appears when compiling happens, and only then
    import io

    from metasim import _warmup
    from metasim.cli import COMPILING, _after_command, _kernels_ahead
    from metasim.progress import Progress

    for started in (True, False):
        monkeypatch.setattr(_warmup, "start", lambda plan=None, started=started: started)
        stream = io.StringIO()
        _kernels_ahead(Progress(stream=stream, heartbeat=None))
        while _after_command:
            _after_command.pop()()
        assert (COMPILING in stream.getvalue()) == started


def test_the_cache_look_up_finds_what_numba_finds():
    # common practice, no source: the look-up without importing a kernel's module asks numba's cache
    # for the same index file and key as the kernel's own dispatcher does
    from numba.core.caching import FunctionCache
    from numba.core.registry import cpu_target

    from metasim import _warmup

    codegen = cpu_target.target_context.codegen()
    for name in (name for group in _warmup.STUDY for name in group):
        dispatcher, spelled = _warmup._kernel(name)
        types = _warmup._argument_types(spelled)
        stand_in = FunctionCache(_warmup._stand_in(name))
        assert stand_in._cache_file._index_path == dispatcher._cache._cache_file._index_path, name
        assert stand_in._index_key(types, codegen) == dispatcher._cache._index_key(types, dispatcher.targetctx.codegen())


def test_every_declared_kernel_is_compiled_ahead_once():
    # common practice, no source: the warm-up plans list each kernel with declared types exactly once
    import ast
    import pathlib

    import metasim
    from metasim import _warmup

    root = pathlib.Path(metasim.__file__).parent
    declared = set()
    for path in root.rglob("_kernels/*.py"):
        for node in ast.parse(path.read_text()).body:
            if isinstance(node, ast.Assign) and any(getattr(t, "id", None) == "SIGNATURES" for t in node.targets):
                module = ".".join(path.relative_to(root.parent).with_suffix("").parts)
                declared |= {f"{module}:{function}" for function in ast.literal_eval(node.value)}
    planned = [name for group in _warmup.EVERY for name in group]
    assert sorted(planned) == sorted(declared)
    assert set(_warmup.STUDY[0]) <= set(_warmup.EVERY[0]) and set(_warmup.STUDY[1]) <= set(_warmup.EVERY[1])


def test_kernel_results_do_not_depend_on_the_number_of_threads(monkeypatch):
    # common practice, no source: every row is computed by the same machine code whatever part of
    # the row range (and thread) it falls in, so one thread and several give the same bits
    from metasim.colorimetry._kernels.ciede2000 import delta_e_2000_pairs
    from metasim.colorimetry._kernels.cielab import lab_of_ratios
    from metasim.colorimetry._kernels.sums import products

    rng = np.random.default_rng(7)
    a, b = rng.random((3000, 441)), rng.random((3, 441))
    ratios = rng.random((9000, 3))
    lab_1, lab_2 = rng.random((9000, 3)) * [100, 80, 80], rng.random((9000, 3)) * [100, 80, 80]
    results = []
    for threads in ("1", "2", "3"):
        monkeypatch.setenv("NUMBA_NUM_THREADS", threads)
        xyz, lab, de = np.empty((3000, 3)), np.empty((9000, 3)), np.empty(9000)
        products(a, b, xyz)
        lab_of_ratios(ratios, lab)
        delta_e_2000_pairs(lab_1, lab_2, 1.0, de)
        results.append((xyz, lab, de))
    for other in results[1:]:
        for first, second in zip(results[0], other):
            np.testing.assert_array_equal(first, second)


def _clipping_rows(rows, seed):
    """Inputs of the CIELAB clipping kernel as metasim.display.drive builds them: four primaries,
    targets beyond the gamut (a strongly saturated colour per row)."""
    from metasim.display.drive import _CLIP_WEIGHT

    rng = np.random.default_rng(seed)
    n = 4
    A = rng.uniform(0.02, 0.5, (rows, 3, n)) * [[1.0], [1.2], [0.9]]
    black = rng.uniform(0.0, 0.002, (rows, 3))
    white = A.sum(-1) + black
    target = white * rng.uniform(0.0, 1.6, (rows, 3)) * rng.choice([0.05, 1.0], (rows, 3))
    H_s = np.broadcast_to(np.eye(n), (rows, n, n)).copy()
    f_s = -0.5 * np.ones((rows, n))
    q_scale = np.maximum(np.maximum(np.trace(H_s, axis1=-2, axis2=-1) / n, np.abs(f_s).max(-1)), 1e-300)
    return A, black, target, white, H_s, f_s, q_scale, _CLIP_WEIGHT, 12, 10 * n + 20


def test_interpreted_cielab_clipping_equals_the_compiled_kernel_bit_for_bit():
    # common practice, no source: the interpreted twin runs the compiled kernel's own bytecode with
    # libm's cube root (what numba compiles np.cbrt to), so it gives the same bits
    from metasim.display._kernels import clip

    inputs = _clipping_rows(60, 12)
    compiled, interpreted = np.empty((60, 4)), np.empty((60, 4))
    clip._clip_rows(*inputs, compiled, 0, 60)
    clip.interpreted_rows()(*inputs, interpreted, 0, 60)
    assert np.array_equal(compiled, interpreted)
    assert ((interpreted >= 0.0) & (interpreted <= 1.0)).all()
    assert ((interpreted == 0.0) | (interpreted == 1.0)).any(1).mean() > 0.5  # most targets lie beyond the box


def test_small_clipping_calls_run_interpreted_while_the_kernel_is_not_compiled(monkeypatch):
    # common practice, no source: a few rows do not pay for compiling the chain (about 10 s);
    # larger calls, or any call once the kernel is at hand, run compiled
    from metasim.display._kernels import clip

    class NotCompiled:
        overloads: dict = {}
        __name__ = "not_compiled"

        def __call__(self, *args):
            raise AssertionError("the compiled kernel was called")

    clip.interpreted_rows()  # made before the kernel is replaced below
    small = _clipping_rows(clip.INTERPRETED_ROWS, 13)
    expected = np.empty((clip.INTERPRETED_ROWS, 4))
    clip._clip_rows(*small, expected, 0, clip.INTERPRETED_ROWS)
    monkeypatch.setattr(clip, "_clip_rows", NotCompiled())
    monkeypatch.setattr(clip, "_compiled_in_cache", lambda: False)
    out = np.empty_like(expected)
    clip.clip_rows(*small, out)
    assert np.array_equal(out, expected)
    large = _clipping_rows(clip.INTERPRETED_ROWS + 1, 14)
    with pytest.raises(AssertionError, match="compiled kernel was called"):
        clip.clip_rows(*large, np.empty((clip.INTERPRETED_ROWS + 1, 4)))
