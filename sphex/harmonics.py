"""The :class:`Harmonics` container and conversion between conventions.

A real field is ``f = sum_{l, m=-l..l} a_lm Y_lm`` with the complex functions
of :mod:`sphex.legendre` (``Y_lm = Lambda_lm exp(i m phi)``).  Only ``m >= 0``
is stored; negative orders follow from reality,
``a_{l,-m} = s_m conj(a_lm)`` with ``s_m = (-1)^m`` under the Condon-Shortley
phase and 1 without it (``Y_{l,-m} = s_m conj(Y_lm)``).

The real (cosine/sine) form is

    f = sum_l sum_{m=0..l} (C_lm cos m phi + S_lm sin m phi) r_m Lambda_lm

with ``r_0 = 1``, ``r_m = sqrt(2)`` for m > 0 in the normalised conventions
(so each real basis function has the same mean square as the complex one) and
``r_m = 1`` for ``"unnormalized"``.  Hence ``C_lm = (2/r_m) Re a_lm`` and
``S_lm = -(2/r_m) Im a_lm`` for m > 0, and ``C_l0 = a_l0``, ``S_l0 = 0``.

Files are the adapter layer's job: :func:`sphex.xr.write_harmonics` writes a
Harmonics to netCDF (it reads back bit for bit with
:func:`sphex.xr.open_harmonics`).
"""
from __future__ import annotations

import numbers

import numpy as np

from sphex.legendre import check_norm, norm_scale
from sphex.limits import all_finite, check_memory, peak_magnitude, refuse_overflow, whole_number

__all__ = ["Harmonics", "convert_factor"]


def convert_factor(lmax: int, norm_from: str, cs_from: bool, norm_to: str, cs_to: bool) -> np.ndarray:
    """Factor G[l, m] with a^to_lm = G[l, m] a^from_lm for the same field.

    Since ``a Lambda`` is invariant, ``G = F_from / F_to`` where
    ``Lambda^norm = F * Lambda^orthonormal`` (:func:`sphex.legendre.norm_scale`),
    times ``(-1)^m`` when the phase convention changes.
    """
    g = norm_scale(lmax, norm_from) / norm_scale(lmax, norm_to)
    if bool(cs_from) != bool(cs_to):
        g[:, 1::2] *= -1.0
    return g


def _real_form_factor(lmax: int, norm: str) -> np.ndarray:
    r = np.full(lmax + 1, 1.0 if norm == "unnormalized" else np.sqrt(2.0))
    r[0] = 1.0
    return r


def _unmasked(values, name: str) -> np.ndarray:
    """``values`` as an array; a ``numpy.ma`` array (a netCDF4 variable with fill values)
    with masked elements is refused: the data under the mask are fill values."""
    arr = np.asanyarray(values)
    if isinstance(arr, np.ma.MaskedArray):
        if np.ma.is_masked(arr):
            raise ValueError(f"{name} is a masked array with {int(np.ma.count_masked(arr))} masked "
                             "elements: the data under a mask are fill values, not coefficients; "
                             "fill the missing coefficients (with zeros, if that is what they are)")
        arr = np.ma.getdata(arr)
    return np.asarray(arr)


IMAG_TOL = 1e-10  # |Im a_l0| allowed, relative to the largest coefficient


def _check_real_order_zero(coef: np.ndarray) -> None:
    """A real field has real a_l0.  Rounding-level imaginary parts (below
    IMAG_TOL of the largest coefficient) are tolerated and ignored by the
    transforms; larger ones mean the input is not what the caller thinks."""
    im = np.abs(coef[..., :, 0].imag)
    if im.size == 0:
        return
    worst = float(np.max(im))
    if not worst > 0:  # all zero (the usual case, O(lmax) to check) or NaN (refused later)
        return
    top = float(np.max(np.abs(coef)))
    if worst > IMAG_TOL * top:
        raise ValueError(
            f"the order-0 coefficients a_l0 have imaginary parts up to {worst:.3g} "
            f"({worst / top:.1e} of the largest coefficient): a real field has real a_l0. "
            "Check the source of the coefficients (for real-form C, S use "
            "Harmonics.from_cos_sin); to drop the imaginary parts set "
            "coef[..., :, 0] = coef[..., :, 0].real")


class Harmonics:
    """Spherical-harmonic coefficients of one real field or a batch of them.

    Parameters
    ----------
    coef : array_like, complex
        ``(..., lmax + 1, lmax + 1)`` indexed ``[..., l, m]`` for ``m >= 0``;
        entries with ``m > l`` must be zero (they are ignored) and ``a_l0``
        real (``ValueError`` when an imaginary part exceeds 1e-10 of the
        largest coefficient; smaller ones are ignored).
    norm : {"orthonormal", "full", "schmidt", "unnormalized"}
    condon_shortley : bool
        Whether the functions include the phase ``(-1)^m``.
    radius : float, optional
        Reference radius (metres) of the expansion, used by operators.
    units : str, optional
        Units of the field (the coefficients carry the same units).

    Examples
    --------
    >>> import numpy as np
    >>> c = np.zeros((3, 3), complex); c[1, 0] = 1.0
    >>> h = Harmonics(c)
    >>> h.lmax, h[1, 0], h.to("full")[1, 0]
    (2, (1+0j), (0.28209479177387814+0j))
    """

    __array_priority__ = 1000

    def __init__(self, coef, norm: str = "orthonormal", condon_shortley: bool = True,
                 radius: float | None = None, units: str | None = None):
        coef = _unmasked(coef, "coef")
        if coef.ndim < 2 or coef.shape[-1] != coef.shape[-2]:
            raise ValueError(f"coef must have shape (..., lmax+1, lmax+1), got {coef.shape}")
        self.coef = coef.astype(np.complex128, copy=False)
        _check_real_order_zero(self.coef)
        self.norm = check_norm(norm)
        self.condon_shortley = bool(condon_shortley)
        if radius is not None:
            radius = float(radius)
            if not np.isfinite(radius) or radius <= 0:
                raise ValueError(f"radius must be a positive number of metres, got {radius!r}")
        self.radius = radius
        self.units = None if units is None else str(units)

    # -- basic properties ---------------------------------------------------
    @property
    def lmax(self) -> int:
        return self.coef.shape[-1] - 1

    @property
    def batch_shape(self) -> tuple[int, ...]:
        return self.coef.shape[:-2]

    def degrees(self) -> np.ndarray:
        return np.arange(self.lmax + 1)

    def replace(self, **changes) -> "Harmonics":
        """A copy with some of coef, norm, condon_shortley, radius, units changed."""
        fields = dict(coef=self.coef, norm=self.norm, condon_shortley=self.condon_shortley,
                      radius=self.radius, units=self.units)
        unknown = set(changes) - set(fields)
        if unknown:
            raise ValueError(f"unknown field(s) {sorted(unknown)}; valid: {sorted(fields)}")
        fields.update(changes)
        if "coef" in changes and changes["coef"] is not self.coef:
            # a result computed from these coefficients (by an operator anywhere in sphex)
            # that left the double range is refused here, whoever computed it
            new = np.asarray(changes["coef"])
            if not np.isfinite(peak_magnitude(new)) and np.isfinite(peak_magnitude(self.coef)):
                refuse_overflow(new, f"the coefficients computed from coefficients up to "
                                f"{peak_magnitude(self.coef):.3g}",
                                "divide the coefficients by a power of ten (larger units) first")
        return Harmonics(**fields)

    def _derived(self, coef: np.ndarray, what: str, **changes) -> "Harmonics":
        """``replace(coef=coef)`` for a result computed from these coefficients, refused
        when it overflowed (finite coefficients in, inf or NaN out)."""
        if not np.isfinite(peak_magnitude(coef)) and np.isfinite(peak_magnitude(self.coef)):
            refuse_overflow(coef, f"{what} of coefficients up to {peak_magnitude(self.coef):.3g}",
                            "divide the coefficients by a power of ten (larger units) first")
        return self.replace(coef=coef, **changes)

    def __repr__(self):
        extra = "".join(f", {k}={v!r}" for k, v in (("radius", self.radius), ("units", self.units))
                        if v is not None)
        batch = f", batch_shape={self.batch_shape}" if self.batch_shape else ""
        return (f"Harmonics(lmax={self.lmax}, norm={self.norm!r}, "
                f"condon_shortley={self.condon_shortley}{batch}{extra})")

    def __getitem__(self, index):
        if not (isinstance(index, tuple) and len(index) == 2):
            raise IndexError("index Harmonics as h[l, m] (use h.coef for array slicing)")
        l, m = index
        if not all(isinstance(v, (numbers.Integral, np.integer)) for v in (l, m)):
            raise IndexError("h[l, m] takes integer degree and order; use h.coef[..., l, m] to slice")
        if not 0 <= l <= self.lmax or abs(m) > l:
            raise IndexError(f"degree {l}, order {m} is outside 0 <= |m| <= l <= lmax={self.lmax}")
        value = self.coef[..., l, abs(m)]
        if m < 0:
            sign = -1.0 if (self.condon_shortley and m % 2) else 1.0
            value = sign * np.conj(value)
        return value[()] if np.ndim(value) == 0 else value

    # -- conventions ----------------------------------------------------------
    def to(self, norm: str | None = None, condon_shortley: bool | None = None) -> "Harmonics":
        """The same field in another normalisation and/or phase convention."""
        norm = self.norm if norm is None else check_norm(norm)
        cs = self.condon_shortley if condon_shortley is None else bool(condon_shortley)
        if norm == self.norm and cs == self.condon_shortley:
            return self.replace(coef=self.coef.copy())
        g = convert_factor(self.lmax, self.norm, self.condon_shortley, norm, cs)
        tri = np.tril(np.ones((self.lmax + 1, self.lmax + 1), dtype=bool))
        if not np.all(np.isfinite(g[tri])) or np.any(g[tri] == 0):
            raise ValueError(f"converting lmax={self.lmax} coefficients to {norm!r} leaves double range "
                             "(unnormalised functions overflow above degree ~150): truncate first "
                             "(h.truncate(...)) or keep a normalised convention")
        with np.errstate(over="ignore", invalid="ignore"):
            coef = np.where(tri, self.coef * g, 0)
        return self._derived(coef, f"the conversion to {norm!r}",
                             norm=norm, condon_shortley=cs)

    def cos_sin(self, out: tuple[np.ndarray, np.ndarray] | None = None
                ) -> tuple[np.ndarray, np.ndarray]:
        """Real-form coefficients ``(C, S)``, each ``(..., lmax+1, lmax+1)`` indexed [l, m].

        ``out``: two float64 arrays of that shape to write ``C`` and ``S`` into (and
        return), instead of new ones; the values are the same to the bit.
        """
        r = _real_form_factor(self.lmax, self.norm)
        scale = np.where(np.arange(self.lmax + 1) == 0, 1.0, 2.0 / r)
        C, S = (None, None) if out is None else out
        with np.errstate(over="ignore"):
            C = np.multiply(self.coef.real, scale, out=C)
            S = np.negative(self.coef.imag, out=S)
            S *= scale
        S[..., :, 0] = 0.0
        if not (all_finite(C) and all_finite(S)) and np.isfinite(peak_magnitude(self.coef)):
            refuse_overflow(np.stack([C, S]), f"the real-form (cosine/sine) coefficients, "
                            f"sqrt(2) times the complex ones up to {peak_magnitude(self.coef):.3g},",
                            "divide the coefficients by a power of ten (larger units) first")
        return C, S

    @classmethod
    def from_cos_sin(cls, C, S, norm: str = "orthonormal", condon_shortley: bool = True,
                     radius: float | None = None, units: str | None = None) -> "Harmonics":
        """Build from real-form coefficients (see the module docstring for the definition)."""
        C = np.asarray(_unmasked(C, "C"), dtype=np.float64)
        S = np.asarray(_unmasked(S, "S"), dtype=np.float64)
        if C.shape != S.shape or C.ndim < 2 or C.shape[-1] != C.shape[-2]:
            raise ValueError(f"C and S must share a shape (..., lmax+1, lmax+1), got {C.shape} and {S.shape}")
        check_norm(norm)
        lmax = C.shape[-1] - 1
        r = _real_form_factor(lmax, norm)
        scale = np.where(np.arange(lmax + 1) == 0, 1.0, r / 2.0)
        coef = (C - 1j * S) * scale
        coef[..., :, 0] = C[..., :, 0]
        coef = np.where(np.tril(np.ones((lmax + 1, lmax + 1), dtype=bool)), coef, 0)
        return cls(coef, norm=norm, condon_shortley=condon_shortley, radius=radius, units=units)

    # -- arithmetic -----------------------------------------------------------
    def _aligned(self, other: "Harmonics") -> np.ndarray:
        if not isinstance(other, Harmonics):
            raise TypeError("Harmonics can only be added to or subtracted from Harmonics")
        if other.lmax != self.lmax:
            raise ValueError(f"lmax differs ({self.lmax} and {other.lmax}): truncate one first "
                             "with h.truncate(lmax)")
        return other.to(self.norm, self.condon_shortley).coef

    def __add__(self, other):
        other = self._aligned(other)
        with np.errstate(over="ignore", invalid="ignore"):
            return self._derived(self.coef + other, "the sum")

    def __sub__(self, other):
        other = self._aligned(other)
        with np.errstate(over="ignore", invalid="ignore"):
            return self._derived(self.coef - other, "the difference")

    def __neg__(self):
        return self.replace(coef=-self.coef)

    def __mul__(self, scalar):
        if not isinstance(scalar, numbers.Real) or isinstance(scalar, bool):
            return NotImplemented
        with np.errstate(over="ignore", invalid="ignore"):
            coef = self.coef * float(scalar)
        return self._derived(coef, f"the product with {float(scalar):g}")

    __rmul__ = __mul__

    def __truediv__(self, scalar):
        if not isinstance(scalar, numbers.Real) or isinstance(scalar, bool):
            return NotImplemented
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            coef = self.coef / float(scalar)
        return self._derived(coef, f"the quotient by {float(scalar):g}")

    def truncate(self, lmax: int) -> "Harmonics":
        """Coefficients up to degree ``lmax`` (zero-padded when larger than self.lmax)."""
        lmax = whole_number(lmax, "lmax")
        fields = int(np.prod(self.batch_shape))
        check_memory(16.0 * fields * (lmax + 1) ** 2, f"Harmonics.truncate({lmax}) of {fields} "
                     f"field{'s' if fields != 1 else ''}", "truncate to a lower degree")
        n = min(lmax, self.lmax) + 1
        coef = np.zeros(self.batch_shape + (lmax + 1, lmax + 1), dtype=np.complex128)
        coef[..., :n, :n] = self.coef[..., :n, :n]
        return self.replace(coef=coef)

    def filter(self, weights) -> "Harmonics":
        """Multiply degree l by ``weights[l]`` (an isotropic filter).

        ``weights`` is 1-D with at least lmax + 1 entries (extra ones ignored),
        or broadcastable to ``batch_shape + (lmax + 1,)``.
        """
        w = np.asarray(weights, dtype=np.float64)
        if w.ndim == 0 or w.shape[-1] < self.lmax + 1:
            raise ValueError(f"need one weight per degree 0..{self.lmax} ({self.lmax + 1} values), "
                             f"got shape {w.shape}")
        if not np.all(np.isfinite(w)):
            raise ValueError("filter weights contain NaN or inf")
        w = w[..., : self.lmax + 1]
        with np.errstate(over="ignore", invalid="ignore"):
            coef = self.coef * w[..., :, None]
        return self._derived(coef, "the filtered coefficients")
