"""The metasim exception family.

Every error raised on purpose by metasim derives from :class:`MetasimError`. Messages say what was
wrong, the offending value and what is allowed, on one line, so the command-line interface can show
them verbatim without a traceback.

Code raises the subclass of its area, never :class:`MetasimError` itself: spectra
(:class:`SpectrumError`, :class:`GridMismatchError`), observers (:class:`ObserverError`),
colorimetry (:class:`ColorimetryError`), displays (:class:`DisplayError`), the mismatch engine and
its summaries (:class:`MismatchError`, :class:`StimulusError`), gamut (:class:`GamutError`), sweeps
(:class:`SweepError`), reports and tables (:class:`ReportError`), files read
(:class:`FileFormatError`) and written (:class:`OutputError`), colour-science interchange
(:class:`InteropError`), and the command line (:class:`OptionError`, :class:`SpecError`). Value
checks shared by the areas live in :mod:`metasim.checks`; they take the subclass to raise as an
argument.
"""

from __future__ import annotations


class MetasimError(Exception):
    """Base class of every error metasim raises on purpose."""


class MetasimWarning(UserWarning):
    """Base class of the warnings metasim gives (the result is computed, but something deserves a look)."""


class RenamedWarning(MetasimWarning, FutureWarning):
    """An option, spec key or value was given by its old name; it still works for one release (the
    message names the new one)."""


class DeprecatedNameWarning(RenamedWarning, DeprecationWarning):
    """A library function or one of its keywords was used by its old name; it still works for one
    release (the message names the new one). A :class:`DeprecationWarning` too, so Python shows it where the call
    is in a script or a test and not where another library makes it."""


class DuplicateStimulusWarning(MetasimWarning):
    """A stimulus set holds the same colour more than once (pooled statistics count it twice)."""


class SpectrumError(MetasimError, ValueError):
    """A spectrum, a wavelength grid or a spectral file is not usable."""


class EnergyOutsideGridError(SpectrumError):
    """A spectrum loses more than the allowed share of its energy outside the wavelength grid."""


class GridMismatchError(SpectrumError):
    """Two spectral quantities are sampled on different wavelength grids."""


class ObserverError(MetasimError, ValueError):
    """An observer name, parameter or population setting is outside what the model allows."""


class ColorimetryError(MetasimError, ValueError):
    """Tristimulus, CIELAB, ICtCp or colour-difference input has the wrong dims, shape or values."""


class DisplayError(MetasimError, ValueError):
    """A display design, primary set, transfer function or drive request is not usable."""


class MismatchError(MetasimError, ValueError):
    """A mismatch study's reference, test display or options are not usable."""


class GamutError(MetasimError, ValueError):
    """A gamut cannot be formed from the given primaries (too few, collinear, degenerate)."""


class StimulusError(MetasimError, ValueError):
    """A stimulus set is empty, malformed or cannot be reproduced."""


class StatisticsError(MetasimError, ValueError):
    """A statistic, interval or comparison was asked for with settings or data it cannot use."""


class SweepError(MetasimError, ValueError):
    """A sweep specification or its output store is not usable."""


class StoreLockedError(SweepError):
    """Another run is writing the sweep store (its lock file names the process and host)."""


class StoreIntegrityError(SweepError):
    """A sweep store's manifest or a chunk file does not hold what the store recorded."""


class ChunkSetAsideWarning(MetasimWarning):
    """A chunk file did not match the store's manifest; it was renamed aside and is computed again."""


class FittingError(MetasimError, ValueError):
    """Colour-matching data cannot be fitted: malformed, out of range, or too few values."""


class NotEnoughMemoryError(MetasimError, MemoryError):
    """A run would need more memory than the machine has available (estimated before it starts)."""


class FileFormatError(MetasimError, ValueError):
    """A file cannot be read: missing, empty, or not in the expected layout."""


class OutputError(MetasimError, ValueError):
    """An output path cannot be written as asked (see :func:`metasim.io.check_outputs`)."""


class OutputExistsError(OutputError):
    """An output file exists already and replacing it was not asked for."""


class OutputIsInputError(OutputError):
    """An output path names one of the command's input files (or two outputs name one file)."""


class InteropError(MetasimError, ValueError):
    """An object cannot be converted to or from colour-science (:mod:`metasim.interop`)."""


class ReportError(MetasimError, ValueError):
    """A report cannot be made: the result holds nothing this report can show."""


class OptionError(MetasimError, ValueError):
    """A command-line option's value cannot be read (an age range, age bands, an output name)."""


class SpecError(MetasimError, ValueError):
    """A display design spec or sweep spec cannot be read or names something metasim does not know."""


__all__ = [
    "MetasimError",
    "MetasimWarning",
    "DuplicateStimulusWarning",
    "SpectrumError",
    "EnergyOutsideGridError",
    "GridMismatchError",
    "ObserverError",
    "ColorimetryError",
    "DisplayError",
    "MismatchError",
    "GamutError",
    "StimulusError",
    "StatisticsError",
    "SweepError",
    "StoreLockedError",
    "StoreIntegrityError",
    "ChunkSetAsideWarning",
    "FittingError",
    "NotEnoughMemoryError",
    "FileFormatError",
    "OutputError",
    "OutputExistsError",
    "OutputIsInputError",
    "InteropError",
    "ReportError",
    "OptionError",
    "SpecError",
]
