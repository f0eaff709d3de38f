"""Reading published coefficient models of gravity and magnetic potentials.

:func:`open_model` reads a model file into a :class:`PotentialModel`: the
coefficients as :class:`~sphex.harmonics.Harmonics` (reference radius set, in
the model's own normalisation), the model's constants and, when the file
carries them, the standard deviations of the coefficients.

Two open exchange formats of the trade are read here:

* the gravity-field exchange format of the International Centre for Global
  Earth Models (keyword header up to ``end_of_head``, then one row
  ``gfc l m C S [sigma_C sigma_S]`` per coefficient; fully normalised
  real coefficients without the Condon-Shortley phase, dimensionless, of
  ``V = GM/r sum_l (R/r)^l sum_m (C cos m lon + S sin m lon) Pbar_lm``);
* the spherical-harmonic coefficient text format of the geomagnetic
  reference-field community (``.shc``: ``#`` comment lines, a line
  ``nmin nmax n_epochs [spline_order steps]``, a line of epochs in decimal
  years, then rows ``n m value_per_epoch ...`` with ``m < 0`` marking the
  sine coefficients h; Schmidt semi-normalised, no Condon-Shortley phase,
  nanotesla, of ``V = a sum_n (a/r)^(n+1) sum_m (g cos m lon + h sin m lon) P_n^m``).

Gzipped files are recognised by their first bytes and read as they are.
Other formats are read by readers registered with
:func:`register_model_reader` by the layers above the numeric core; this
module never reads netCDF itself.  The project's own netCDF model files are
read by :func:`sphex.xr.open_model`, or by :func:`open_model` once
:mod:`sphex.xr` has been imported (the import registers the reader).
"""
from __future__ import annotations

import dataclasses
import gzip
import io
import itertools
import math
import os
from pathlib import Path
from typing import Callable

import numpy as np

from sphex.harmonics import Harmonics

__all__ = ["PotentialModel", "open_model", "register_model_reader",
           "GEOMAGNETIC_REFERENCE_RADIUS"]

# The reference radius of the Earth's main-field models, 6371.2 km (common practice);
# the .shc format does not state it.
GEOMAGNETIC_REFERENCE_RADIUS = 6371200.0

_GZIP_MAGIC = b"\x1f\x8b"
_NETCDF_MAGIC = (b"CDF\x01", b"CDF\x02", b"CDF\x05", b"\x89HDF\r\n\x1a\n")
_CHUNK_ROWS = 200_000


@dataclasses.dataclass(frozen=True)
class PotentialModel:
    """A published potential model: coefficients, constants, uncertainties.

    Attributes
    ----------
    harmonics : Harmonics
        Coefficients with ``radius`` (metres) set, in the model's own
        convention (``"full"`` without the Condon-Shortley phase for gravity
        exchange files, ``"schmidt"`` without it for ``.shc``).  Gravity
        coefficients are dimensionless (``units=None``), magnetic ones carry
        ``units="nT"``.  A model read at several epochs has a leading batch
        axis, one entry per epoch.
    gm : float or None
        GM in m^3 s^-2 (gravity models), None otherwise.
    sigmas : Harmonics or None
        Standard deviations of the real coefficients, same convention (only
        change its normalisation, never its phase convention: a phase change
        would flip signs).
    name : str
    tide_system : str or None
        As stated in the file (``"zero_tide"``, ``"tide_free"``, ``"mean_tide"``, ...).
    kind : str
        ``"gravity"`` or ``"magnetic"``.
    epoch : float, ndarray or None
        Decimal year(s) the coefficients are for (magnetic models), else None.
    errors : str or None
        What the sigmas are (``"formal"``, ``"calibrated"``,
        ``"calibrated_and_formal"``), or None without them.
    source : str
        The file the model was read from.
    header : dict
        Every header entry of the file, as text.
    """

    harmonics: Harmonics
    gm: float | None = None
    sigmas: Harmonics | None = None
    name: str = ""
    tide_system: str | None = None
    kind: str = "gravity"
    epoch: float | np.ndarray | None = None
    errors: str | None = None
    source: str = ""
    header: dict = dataclasses.field(default_factory=dict)

    def __post_init__(self):
        if not isinstance(self.harmonics, Harmonics) or self.harmonics.radius is None:
            raise ValueError("a PotentialModel needs Harmonics with the reference radius set "
                             "(Harmonics(..., radius=metres))")
        if self.kind not in ("gravity", "magnetic"):
            raise ValueError(f"kind must be 'gravity' or 'magnetic', got {self.kind!r}")
        if self.gm is not None and not (math.isfinite(self.gm) and self.gm > 0):
            raise ValueError(f"gm must be a positive number of m^3 s^-2, got {self.gm!r}")

    @property
    def radius(self) -> float:
        """Reference radius of the coefficients, metres."""
        return self.harmonics.radius

    @property
    def lmax(self) -> int:
        return self.harmonics.lmax

    def __repr__(self):
        parts = [f"name={self.name!r}", f"kind={self.kind!r}", f"lmax={self.lmax}",
                 f"radius={self.radius!r}"]
        if self.gm is not None:
            parts.append(f"gm={self.gm!r}")
        if self.tide_system:
            parts.append(f"tide_system={self.tide_system!r}")
        if self.epoch is not None:
            parts.append(f"epoch={self.epoch!r}")
        parts.append(f"sigmas={'yes' if self.sigmas is not None else 'no'}")
        return f"PotentialModel({', '.join(parts)})"


# ---------------------------------------------------------------------------
# the registry of readers
# ---------------------------------------------------------------------------
_READERS: list[tuple[Callable, Callable]] = []


def register_model_reader(detect: Callable[[Path, bytes], bool],
                          read: Callable[..., PotentialModel]) -> None:
    """Add a reader for another model file format.

    Parameters
    ----------
    detect : callable
        ``detect(path, head) -> bool`` with ``head`` the first 1024 bytes of
        the file as stored (compressed files are not unpacked); True when
        ``read`` understands the file.
    read : callable
        ``read(path, epoch=None, **options) -> PotentialModel``.

    Notes
    -----
    Registered readers are asked before the built-in ones, the most recently
    registered first; registering the same pair again does nothing.  The
    xarray layer registers its reader for the project's netCDF coefficient
    files this way.
    """
    if not (callable(detect) and callable(read)):
        raise ValueError("register_model_reader needs two functions: detect(path, head) and "
                         "read(path, epoch=None, **options)")
    if (detect, read) not in _READERS:
        _READERS.insert(0, (detect, read))


def open_model(path, epoch=None, *, extrapolate: bool = False,
               radius: float | None = None) -> PotentialModel:
    """Read a coefficient model of a gravity or magnetic potential.

    Parameters
    ----------
    path : str or path-like
        A gravity-field exchange file (``gfc`` rows after ``end_of_head``), a
        geomagnetic ``.shc`` file, either possibly gzipped, or a file of a
        format registered with :func:`register_model_reader`.  The format is
        recognised from the content, not the file name.
    epoch : float, optional
        Decimal year for models given at several epochs (``.shc``): an epoch
        of the file is taken as it is, one between two epochs is interpolated
        linearly.  Default: every epoch of the file, as a batch (a single
        epoch file gives a single field).
    extrapolate : bool
        Accept an epoch outside the file's range (linear extrapolation from
        the nearest two epochs).  Off by default: the file does not support it.
    radius : float, optional
        Reference radius in metres for formats that do not state it
        (``.shc``: default 6371.2 km, the Earth's geomagnetic reference
        radius).  Refused for formats that state their own.

    Returns
    -------
    PotentialModel

    Raises
    ------
    ValueError
        A file that cannot be read: the message names the file, the line and
        what is wrong (a missing ``end_of_head``, an unknown row key, missing
        sigma columns, a truncated or duplicated coefficient, degrees beyond
        ``max_degree``, time-variable rows, ...).  Also for an epoch outside
        the file's range, and for a netCDF file while no reader for it is
        registered.

    Notes
    -----
    Gravity files: when the file has no degree-0 row, ``C00 = 1`` (the file's
    GM defines the degree-0 potential); absent degree-1 rows are zero
    (origin at the centre of mass).  Every coefficient from degree 2 to
    ``max_degree`` must be present.  ``.shc`` files whose spline order is
    above 2 are meant to be interpolated with splines of that order; linear
    interpolation between their epochs is an approximation there.

    Examples
    --------
    >>> import tempfile, os
    >>> from sphex.models import open_model
    >>> text = '''product_type gravity_field
    ... modelname tiny
    ... earth_gravity_constant 3.986004415e14
    ... radius 6378136.3
    ... max_degree 2
    ... errors no
    ... end_of_head
    ... gfc 0 0 1.0 0.0
    ... gfc 2 0 -4.84e-4 0.0
    ... gfc 2 1 0.0 0.0
    ... gfc 2 2 2.4e-6 -1.4e-6
    ... '''
    >>> path = os.path.join(tempfile.mkdtemp(), "tiny.gfc")
    >>> _ = open(path, "w").write(text)
    >>> m = open_model(path)
    >>> m.name, m.gm, m.lmax, m.harmonics.norm
    ('tiny', 398600441500000.0, 2, 'full')
    """
    path = Path(os.fspath(path))
    if not path.is_file():
        raise ValueError(f"{path}: no such file")
    with open(path, "rb") as f:
        head = f.read(1024)
    for detect, read in _READERS:
        if detect(path, head):
            return read(path, epoch=epoch, extrapolate=extrapolate, radius=radius)
    if head.startswith(_NETCDF_MAGIC):
        raise ValueError(f"{path} is a netCDF file: netCDF model files are read by the xarray "
                         "layer; open it with sphex.xr.open_model(path), or import sphex.xr "
                         "first (which registers its reader) and call open_model again")
    with _open_text(path, head) as text:
        kind = _sniff(path, text)
    if kind == "gravity":
        if epoch is not None:
            raise ValueError(f"{path}: a static gravity model has no epochs; drop epoch={epoch!r}")
        if radius is not None:
            raise ValueError(f"{path}: the file states its reference radius; drop radius={radius!r}")
        with _open_text(path, head) as text:
            return _read_gravity_exchange(path, text)
    with _open_text(path, head) as text:
        return _read_geomagnetic_table(path, text, epoch, extrapolate, radius)


def _open_text(path: Path, head: bytes) -> io.TextIOBase:
    if head.startswith(_GZIP_MAGIC):
        return io.TextIOWrapper(gzip.open(path, "rb"), encoding="latin-1", newline=None)
    return open(path, "r", encoding="latin-1", newline=None)


def _sniff(path: Path, text) -> str:
    """'gravity' or 'magnetic' from the first lines of the text."""
    try:
        for line in itertools.islice(text, 2000):
            words = line.split()
            if not words or words[0].startswith("#"):
                continue
            first = words[0].lower()
            if first in ("product_type", "end_of_head", "begin_of_head", "earth_gravity_constant",
                         "modelname", "max_degree", "generating_institute"):
                return "gravity"
            if all(_is_int(w) for w in words[:3]) and len(words) >= 3:
                return "magnetic"
    except (OSError, EOFError, UnicodeError) as exc:
        raise ValueError(f"{path}: cannot read the file ({exc}); is it damaged?") from None
    # nothing conclusive in the content: the file name decides which reader reports the fault
    suffixes = [s.lower() for s in path.suffixes if s.lower() != ".gz"]
    if suffixes and suffixes[-1] == ".shc":
        return "magnetic"
    if suffixes and suffixes[-1] == ".gfc":
        return "gravity"
    raise ValueError(f"{path}: not a model format sphex reads: expected a gravity-field exchange "
                     "file (keyword header ending with 'end_of_head', then 'gfc' rows) or a "
                     "geomagnetic .shc file ('nmin nmax n_epochs' after '#' comments)")


def _is_int(word: str) -> bool:
    try:
        int(word)
    except ValueError:
        return False
    return True


def _number(word: str) -> float:
    """A float, accepting Fortran exponents (1.0D-06)."""
    return float(word.replace("D", "E").replace("d", "e"))


# ---------------------------------------------------------------------------
# gravity-field exchange format
# ---------------------------------------------------------------------------
_NORMS = {"fully_normalized": "full", "unnormalized": "unnormalized"}
_ERRORS = ("no", "formal", "calibrated", "calibrated_and_formal")
_TIME_VARIABLE_KEYS = ("gfct", "trnd", "acos", "asin", "dot")
_COLUMNS = "key, degree, order, C, S, sigma C, sigma S"
_KNOWN_KEYWORDS = ("product_type", "modelname", "earth_gravity_constant", "gravity_constant",
                   "radius", "max_degree", "errors", "norm", "tide_system")


def _read_gravity_exchange(path: Path, text) -> PotentialModel:
    header, lineno = _gravity_header(path, text)
    gm = _header_number(path, header, ("earth_gravity_constant", "gravity_constant"), "GM (m^3 s^-2)")
    radius = _header_number(path, header, ("radius",), "the reference radius (m)")
    norm_word = header.get("norm", ("fully_normalized", 0))[0].lower()
    if norm_word not in _NORMS:
        raise ValueError(f"{path}, line {header['norm'][1]}: unknown norm {norm_word!r}; "
                         f"this format knows {', '.join(_NORMS)}")
    errors = header.get("errors", (None, 0))[0]
    if errors is not None:
        errors = errors.lower()
        if errors not in _ERRORS:
            raise ValueError(f"{path}, line {header['errors'][1]}: unknown errors kind {errors!r}; "
                             f"this format knows {', '.join(_ERRORS)}")
    declared = None
    if "max_degree" in header:
        word, line = header["max_degree"]
        if not _is_int(word) or int(word) < 0:
            raise ValueError(f"{path}, line {line}: max_degree must be a non-negative integer, "
                             f"got {word!r}")
        declared = int(word)
    product = header.get("product_type", ("gravity_field", 0))
    if product[0].lower() != "gravity_field":
        raise ValueError(f"{path}, line {product[1]}: product_type {product[0]!r} is not read by "
                         "sphex (only gravity_field)")
    need_sigmas = errors not in (None, "no")
    rows = _gravity_rows(path, text, lineno, need_sigmas)
    lmax = _check_coverage(path, rows, declared)
    C, S, sC, sS = _fill(path, rows, lmax)
    norm = _NORMS[norm_word]
    h = Harmonics.from_cos_sin(C, S, norm=norm, condon_shortley=False, radius=radius)
    sigmas = None
    if rows["sigmas"] is not None and errors != "no":
        sigmas = Harmonics.from_cos_sin(sC, sS, norm=norm, condon_shortley=False, radius=radius)
        if errors is None:
            errors = "unstated"
    name = header.get("modelname", (path.name, 0))[0]
    tide = header.get("tide_system", (None, 0))[0]
    return PotentialModel(harmonics=h, gm=gm, sigmas=sigmas, name=name, tide_system=tide,
                          kind="gravity", errors=errors if sigmas is not None else None,
                          source=str(path), header={k: v[0] for k, v in header.items()})


def _gravity_header(path: Path, text) -> tuple[dict, int]:
    """Keyword lines up to end_of_head: {keyword: (value, line)} and the line count read."""
    header: dict = {}
    lineno = 0
    begun = False
    try:
        for lineno, line in enumerate(text, start=1):
            words = line.split()
            if not words:
                continue
            key = words[0].lower()
            if key == "end_of_head":
                return header, lineno
            if key == "begin_of_head":
                header.clear()  # what came before was free text
                begun = True
                continue
            if key in ("gfc",) + _TIME_VARIABLE_KEYS:
                raise ValueError(f"{path}, line {lineno}: coefficient row before 'end_of_head': "
                                 "the header must end with a line 'end_of_head'")
            value = " ".join(words[1:])
            if key in header and (begun or key in _KNOWN_KEYWORDS):
                raise ValueError(f"{path}, line {lineno}: header keyword {key!r} given twice "
                                 f"(first on line {header[key][1]})")
            header[key] = (value, lineno)
    except (OSError, EOFError, UnicodeError) as exc:
        raise ValueError(f"{path}, line {lineno + 1}: cannot read the file ({exc}); is it "
                         "damaged or truncated?") from None
    raise ValueError(f"{path}: no 'end_of_head' line in {lineno} lines: the header is incomplete "
                     "(truncated file?) or this is not a gravity-field exchange file")


def _header_number(path: Path, header: dict, keys: tuple, what: str) -> float:
    for key in keys:
        if key in header:
            word, line = header[key]
            try:
                value = _number(word.split()[0])
            except (ValueError, IndexError):
                value = float("nan")
            if not (math.isfinite(value) and value > 0):
                raise ValueError(f"{path}, line {line}: {key} must be a positive number, got {word!r}")
            return value
    raise ValueError(f"{path}: the header has no {keys[0]} line ({what}); the format needs it")


def _gravity_rows(path: Path, text, lineno: int, need_sigmas: bool) -> dict:
    """Parse the coefficient rows in chunks: arrays l, m, C, S, sigmas (or None), lines."""
    parts: dict[str, list] = {"l": [], "m": [], "values": [], "lines": []}
    width = None
    try:
        while True:
            chunk = list(itertools.islice(text, _CHUNK_ROWS))
            if not chunk:
                break
            first = lineno + 1
            lineno += len(chunk)
            block, width = _gravity_chunk(path, chunk, first, width, need_sigmas)
            for key, value in zip(("l", "m", "values", "lines"), block):
                parts[key].append(value)
    except (OSError, EOFError, UnicodeError) as exc:
        raise ValueError(f"{path}, after line {lineno}: cannot read the file ({exc}); is it "
                         "damaged or truncated?") from None
    if width is None:
        raise ValueError(f"{path}: no coefficient rows after 'end_of_head' (truncated file?)")
    values = np.concatenate(parts["values"])
    return {"l": np.concatenate(parts["l"]), "m": np.concatenate(parts["m"]),
            "C": values[:, 0], "S": values[:, 1],
            "sigmas": values[:, 2:4] if width >= 7 else None,
            "lines": np.concatenate(parts["lines"])}


def _gravity_chunk(path: Path, chunk: list[str], first: int, width, need_sigmas: bool):
    """One chunk of rows: parsed in C by numpy when every row is a plain 'gfc' row of the
    same width, else line by line (which finds and names the faulty line)."""
    filled = [i for i, line in enumerate(chunk) if not line.isspace() and line]
    if not filled:
        return (np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros((0, 4)),
                np.zeros(0, np.int64)), width
    if width is None:
        width = len(chunk[filled[0]].split())
    lines = first + np.asarray(filled, dtype=np.int64)
    keys = {chunk[i].split(None, 1)[0] for i in filled}
    if keys == {"gfc"} and width >= 5 and not (need_sigmas and width < 7):
        try:
            table = np.loadtxt(chunk, usecols=range(1, min(width, 7)), comments=None, ndmin=2)
        except ValueError:
            table = None
        if (table is not None and table.shape[0] == len(filled)
                and np.all(np.isfinite(table[:, :2])) and np.all(table[:, :2] == np.round(table[:, :2]))):
            values = np.zeros((len(filled), 4))
            values[:, :table.shape[1] - 2] = table[:, 2:]
            return (table[:, 0].astype(np.int64), table[:, 1].astype(np.int64), values, lines), width
    numbered = [(first + i, chunk[i].split()) for i in filled]
    return _gravity_rows_slowly(path, numbered, width, need_sigmas), width


def _gravity_rows_slowly(path: Path, numbered, width: int, need_sigmas: bool):
    n = len(numbered)
    l = np.zeros(n, np.int64)
    m = np.zeros(n, np.int64)
    values = np.zeros((n, 4))
    lines = np.zeros(n, np.int64)
    for i, (line, words) in enumerate(numbered):
        key = words[0].lower()
        if key in _TIME_VARIABLE_KEYS:
            raise ValueError(f"{path}, line {line}: time-variable coefficients ({words[0]!r} rows) "
                             "are not read by sphex: use a static model, or evaluate the "
                             "time-variable model at your epoch into 'gfc' rows first")
        if key != "gfc":
            raise ValueError(f"{path}, line {line}: unknown row key {words[0]!r}; a static model "
                             f"has rows 'gfc degree order C S [sigma C sigma S]'")
        if need_sigmas and len(words) < 7:
            raise ValueError(f"{path}, line {line}: {len(words)} columns, but the header says the "
                             f"file has standard deviations: expected 7 ({_COLUMNS}); the sigma "
                             "columns are missing (or the line is truncated)")
        if len(words) != width:
            raise ValueError(f"{path}, line {line}: {len(words)} columns where the rows before have "
                             f"{width} ({_COLUMNS}): truncated or damaged line")
        if width < 5:
            raise ValueError(f"{path}, line {line}: {width} columns; expected at least 5 "
                             f"({_COLUMNS}): truncated or damaged line")
        try:
            l[i], m[i] = int(words[1]), int(words[2])
        except ValueError:
            raise ValueError(f"{path}, line {line}: degree and order must be integers, got "
                             f"{words[1]!r} and {words[2]!r}") from None
        for j, word in enumerate(words[3:min(width, 7)]):
            try:
                values[i, j] = _number(word)
            except ValueError:
                raise ValueError(f"{path}, line {line}: {word!r} is not a number") from None
        lines[i] = line
    return l, m, values, lines


def _check_coverage(path: Path, rows: dict, declared: int | None) -> int:
    """Degree and order ranges, duplicates, completeness up to max_degree; returns lmax."""
    l, m, lines = rows["l"], rows["m"], rows["lines"]
    bad = np.flatnonzero((l < 0) | (m < 0) | (m > l))
    if bad.size:
        i = bad[0]
        raise ValueError(f"{path}, line {lines[i]}: degree {l[i]}, order {m[i]} is outside "
                         "0 <= order <= degree")
    finite = np.isfinite(rows["C"]) & np.isfinite(rows["S"])
    if rows["sigmas"] is not None:
        finite &= np.all(np.isfinite(rows["sigmas"]), axis=1)
    if not np.all(finite):
        i = int(np.argmin(finite))
        raise ValueError(f"{path}, line {lines[i]}: NaN or infinite coefficient")
    top = int(l.max())
    if declared is not None and top > declared:
        i = int(np.argmax(l))
        raise ValueError(f"{path}, line {lines[i]}: degree {top} is above max_degree {declared} "
                         "of the header")
    lmax = declared if declared is not None else top
    index = l * (lmax + 1) + m
    order = np.argsort(index, kind="stable")
    same = np.flatnonzero(index[order][1:] == index[order][:-1])
    if same.size:
        a, b = order[same[0]], order[same[0] + 1]
        raise ValueError(f"{path}, line {lines[b]}: degree {l[b]}, order {m[b]} given again "
                         f"(first on line {lines[a]})")
    seen = np.zeros((lmax + 1, lmax + 1), dtype=bool)
    seen[l, m] = True
    required = np.tril(np.ones_like(seen))
    required[:2] = False  # degrees 0 and 1 may be left out
    missing = np.argwhere(required & ~seen)
    if missing.size:
        ml, mm = missing[0]
        raise ValueError(f"{path}: the coefficient of degree {ml}, order {mm} is missing "
                         f"({len(missing)} coefficients up to degree {lmax} are): the file looks "
                         "truncated or damaged")
    return lmax


def _fill(path: Path, rows: dict, lmax: int):
    l, m, lines = rows["l"], rows["m"], rows["lines"]
    S = rows["S"]
    bad = np.flatnonzero((m == 0) & (S != 0))
    if bad.size:
        raise ValueError(f"{path}, line {lines[bad[0]]}: S of order 0 must be 0, got {S[bad[0]]!r}")
    C = np.zeros((lmax + 1, lmax + 1))
    Sg = np.zeros_like(C)
    C[l, m] = rows["C"]
    Sg[l, m] = S
    if not np.any((l == 0) & (m == 0)):
        C[0, 0] = 1.0  # the degree-0 potential GM/r that the file's GM defines
    sC = sS = None
    if rows["sigmas"] is not None:
        sC = np.zeros_like(C)
        sS = np.zeros_like(C)
        sC[l, m] = np.abs(rows["sigmas"][:, 0])
        sS[l, m] = np.where(m == 0, 0.0, np.abs(rows["sigmas"][:, 1]))
    return C, Sg, sC, sS


# ---------------------------------------------------------------------------
# geomagnetic .shc format
# ---------------------------------------------------------------------------
def _read_geomagnetic_table(path: Path, text, epoch, extrapolate: bool,
                            radius: float | None) -> PotentialModel:
    lines = _numbered_data_lines(path, text)
    if len(lines) < 2:
        raise ValueError(f"{path}: the file ends before the epoch line: a .shc file needs a line "
                         "'nmin nmax n_epochs ...' and a line of epochs (truncated file?)")
    (line0, words0), (line1, words1) = lines[0], lines[1]
    try:
        nmin, nmax, count = (int(w) for w in words0[:3])
    except ValueError:
        raise ValueError(f"{path}, line {line0}: expected integers 'nmin nmax n_epochs "
                         f"[spline_order steps]', got {' '.join(words0)!r}") from None
    if not (0 <= nmin <= nmax and count >= 1):
        raise ValueError(f"{path}, line {line0}: need 0 <= nmin <= nmax and n_epochs >= 1, got "
                         f"{nmin} {nmax} {count}")
    extra = {}
    for key, word in zip(("spline_order", "steps"), words0[3:5]):
        if not _is_int(word):
            raise ValueError(f"{path}, line {line0}: {key} must be an integer, got {word!r}")
        extra[key] = int(word)
    if len(words1) != count:
        raise ValueError(f"{path}, line {line1}: {len(words1)} epochs where line {line0} "
                         f"announces {count}")
    try:
        epochs = np.array([_number(w) for w in words1])
    except ValueError:
        raise ValueError(f"{path}, line {line1}: the epochs must be numbers (decimal years), "
                         f"got {' '.join(words1)!r}") from None
    if count > 1 and not np.all(np.diff(epochs) > 0):
        raise ValueError(f"{path}, line {line1}: the epochs must increase")
    C, S = _geomagnetic_coefficients(path, lines[2:], nmin, nmax, count)
    values_c, values_s, chosen = _at_epoch(path, C, S, epochs, epoch, extrapolate)
    if radius is None:
        radius = GEOMAGNETIC_REFERENCE_RADIUS
    h = Harmonics.from_cos_sin(values_c, values_s, norm="schmidt", condon_shortley=False,
                               radius=radius, units="nT")
    header = {"nmin": nmin, "nmax": nmax, "epochs": epochs.tolist(), **extra}
    return PotentialModel(harmonics=h, gm=None, sigmas=None, name=path.name.split(".")[0],
                          tide_system=None, kind="magnetic", epoch=chosen, errors=None,
                          source=str(path), header=header)


def _numbered_data_lines(path: Path, text) -> list[tuple[int, list[str]]]:
    out = []
    lineno = 0
    try:
        for lineno, line in enumerate(text, start=1):
            words = line.split()
            if words and not words[0].startswith("#"):
                out.append((lineno, words))
    except (OSError, EOFError, UnicodeError) as exc:
        raise ValueError(f"{path}, line {lineno + 1}: cannot read the file ({exc}); is it "
                         "damaged or truncated?") from None
    return out


def _geomagnetic_coefficients(path: Path, rows, nmin: int, nmax: int, count: int):
    """(C, S) arrays (n_epochs, nmax+1, nmax+1) from rows 'n m v1 .. vN'."""
    expected = sum(2 * n + 1 for n in range(nmin, nmax + 1))
    C = np.zeros((count, nmax + 1, nmax + 1))
    S = np.zeros_like(C)
    seen: dict[tuple[int, int], int] = {}
    for line, words in rows:
        if len(words) != count + 2:
            raise ValueError(f"{path}, line {line}: {len(words)} columns, expected {count + 2} "
                             f"(degree, order, one value per epoch): truncated or damaged line")
        try:
            n, m = int(words[0]), int(words[1])
            values = [_number(w) for w in words[2:]]
        except ValueError:
            raise ValueError(f"{path}, line {line}: expected integers degree, order and "
                             f"{count} numbers, got {' '.join(words)!r}") from None
        if not (nmin <= n <= nmax and abs(m) <= n):
            raise ValueError(f"{path}, line {line}: degree {n}, order {m} is outside "
                             f"{nmin} <= degree <= {nmax}, |order| <= degree")
        if (n, m) in seen:
            raise ValueError(f"{path}, line {line}: degree {n}, order {m} given again (first on "
                             f"line {seen[n, m]})")
        if not all(math.isfinite(v) for v in values):
            raise ValueError(f"{path}, line {line}: NaN or infinite coefficient")
        seen[n, m] = line
        if m >= 0:
            C[:, n, m] = values
        else:
            S[:, n, -m] = values
    if len(seen) != expected:
        missing = next((n, m) for n in range(nmin, nmax + 1) for m in range(-n, n + 1)
                       if (n, m) not in seen)
        last = rows[-1][0] if rows else "the epoch line"
        raise ValueError(f"{path}: {len(seen)} of the {expected} coefficient rows of degrees "
                         f"{nmin}..{nmax} are present (the first missing: degree {missing[0]}, "
                         f"order {missing[1]}; the file ends at line {last}): truncated file?")
    return C, S


def _at_epoch(path: Path, C, S, epochs: np.ndarray, epoch, extrapolate: bool):
    """Coefficients at the chosen epoch: a column, a linear interpolation, or all of them."""
    if epoch is None:
        if epochs.size == 1:
            return C[0], S[0], float(epochs[0])
        return C, S, epochs.copy()
    try:
        t = float(epoch)
    except (TypeError, ValueError):
        raise ValueError(f"epoch must be a decimal year such as 2020.5, got {epoch!r}") from None
    if not math.isfinite(t):
        raise ValueError(f"epoch must be a finite decimal year, got {epoch!r}")
    exact = np.flatnonzero(np.abs(epochs - t) <= 1e-9 * max(1.0, abs(t)))
    if exact.size:
        k = int(exact[0])
        return C[k], S[k], float(epochs[k])
    inside = epochs[0] < t < epochs[-1]
    if not inside and not extrapolate:
        span = f"{epochs[0]:g}" if epochs.size == 1 else f"{epochs[0]:g} to {epochs[-1]:g}"
        raise ValueError(f"{path}: epoch {t:g} is outside the file's epochs ({span}); choose an "
                         "epoch in that range, or pass extrapolate=True to extend the nearest "
                         "two epochs linearly")
    if epochs.size == 1:
        raise ValueError(f"{path}: the file has a single epoch ({epochs[0]:g}); it cannot be "
                         f"extrapolated to {t:g}: drop epoch= to read it")
    k = int(np.clip(np.searchsorted(epochs, t) - 1, 0, epochs.size - 2))
    w = (t - epochs[k]) / (epochs[k + 1] - epochs[k])
    return ((1.0 - w) * C[k] + w * C[k + 1], (1.0 - w) * S[k] + w * S[k + 1], t)
