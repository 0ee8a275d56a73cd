"""Wavelength bands. Units: nm.

A band is (centre, lower edge, upper edge) in nm. Band sets are sorted, non-empty and non-overlapping;
the default set is 300-1000 nm in 10 nm steps (centres), each band 10 nm wide.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from matgen.constants import DEFAULT_BAND_START_NM, DEFAULT_BAND_STEP_NM, DEFAULT_BAND_STOP_NM
from matgen.errors import BandError


@dataclass(frozen=True)
class BandSet:
    """A sorted set of non-overlapping wavelength bands.

    Attributes
    ----------
    centre_nm, lower_nm, upper_nm : ndarray of float64, shape (B,)
        Band centres and edges in nm.

    """

    centre_nm: np.ndarray
    lower_nm: np.ndarray
    upper_nm: np.ndarray

    def __post_init__(self):
        c = np.atleast_1d(np.asarray(self.centre_nm, dtype=np.float64))
        lo = np.atleast_1d(np.asarray(self.lower_nm, dtype=np.float64))
        hi = np.atleast_1d(np.asarray(self.upper_nm, dtype=np.float64))
        object.__setattr__(self, "centre_nm", c)
        object.__setattr__(self, "lower_nm", lo)
        object.__setattr__(self, "upper_nm", hi)
        if c.size == 0:
            raise BandError("the band set is empty; give at least one band")
        if not (c.shape == lo.shape == hi.shape) or c.ndim != 1:
            raise BandError("band centres and edges must be 1-D arrays of equal length")
        for name, arr in (("centre", c), ("lower edge", lo), ("upper edge", hi)):
            bad = ~np.isfinite(arr)
            if bad.any():
                i = int(np.argmax(bad))
                raise BandError(f"band {i}: {name} is {arr[i]!r}; band wavelengths must be finite (nm)")
        for i in range(c.size):
            if not (lo[i] <= c[i] <= hi[i]) or lo[i] <= 0 or hi[i] <= lo[i]:
                raise BandError(
                    f"band {i}: edges [{lo[i]}, {hi[i]}] nm around centre {c[i]} nm are invalid; "
                    "need 0 < lower < upper and lower <= centre <= upper"
                )
        if c.size > 1:
            if np.any(np.diff(c) <= 0):
                i = int(np.argmax(np.diff(c) <= 0))
                raise BandError(
                    f"bands are not sorted: centre {c[i + 1]} nm follows {c[i]} nm; sort them ascending"
                )
            over = lo[1:] < hi[:-1] - 1e-9
            if over.any():
                i = int(np.argmax(over))
                raise BandError(
                    f"bands {i} [{lo[i]}, {hi[i]}] nm and {i + 1} [{lo[i + 1]}, {hi[i + 1]}] nm overlap"
                )

    def __len__(self) -> int:
        return int(self.centre_nm.size)

    @property
    def width_nm(self) -> np.ndarray:
        """Band widths in nm."""
        return self.upper_nm - self.lower_nm

    def subset(self, index) -> BandSet:
        """Return the bands at ``index`` (an int array, slice or boolean mask)."""
        return BandSet(self.centre_nm[index], self.lower_nm[index], self.upper_nm[index])

    def index_of(self, wavelength_nm: float) -> int:
        """Index of the band that contains ``wavelength_nm``; :class:`BandError` if none does."""
        hit = np.nonzero((self.lower_nm <= wavelength_nm) & (wavelength_nm <= self.upper_nm))[0]
        if hit.size == 0:
            raise BandError(
                f"{wavelength_nm} nm lies in no band of this set ({self.lower_nm[0]}-{self.upper_nm[-1]} nm)"
            )
        return int(hit[0])

    def to_dict(self) -> dict:
        """JSON-ready form: lists of centres and edges in nm."""
        return {
            "centre_nm": self.centre_nm.tolist(),
            "lower_nm": self.lower_nm.tolist(),
            "upper_nm": self.upper_nm.tolist(),
        }

    @classmethod
    def from_dict(cls, data: dict) -> BandSet:
        """Inverse of :meth:`to_dict`."""
        try:
            return cls(data["centre_nm"], data["lower_nm"], data["upper_nm"])
        except BandError:
            raise
        except (KeyError, TypeError, ValueError) as exc:
            raise BandError(f"band table needs centre_nm, lower_nm and upper_nm lists ({exc})") from exc

    @classmethod
    def regular(
        cls, start_nm: float, stop_nm: float, step_nm: float, width_nm: float | None = None
    ) -> BandSet:
        """Bands centred from ``start_nm`` to ``stop_nm`` inclusive every ``step_nm`` (all in nm).

        The width defaults to the step; a width wider than the step is a :class:`BandError`.
        """
        for name, v in (("start", start_nm), ("stop", stop_nm), ("step", step_nm)):
            if not np.isfinite(v):
                raise BandError(f"band {name} is {v!r}; must be a finite number of nm")
        if step_nm <= 0:
            raise BandError(f"band step is {step_nm} nm; must be > 0")
        if stop_nm < start_nm:
            raise BandError(f"band stop {stop_nm} nm is below start {start_nm} nm")
        if not (stop_nm - start_nm) / step_nm < 100000:
            raise BandError(f"({stop_nm} - {start_nm}) / {step_nm} nm is too many bands; at most 100000")
        n = int(np.floor((stop_nm - start_nm) / step_nm + 1e-9)) + 1
        if n > 100000:
            raise BandError(f"{n} bands requested; at most 100000")
        c = start_nm + step_nm * np.arange(n)
        w = step_nm if width_nm is None else width_nm
        if w <= 0 or w > step_nm + 1e-9:
            raise BandError(f"band width {w} nm must be in (0, step={step_nm}] so that bands do not overlap")
        return cls(c, c - 0.5 * w, c + 0.5 * w)

    @classmethod
    def parse(cls, text: str) -> BandSet:
        """Parse a band spec.

        ``"300:1000:10"`` (start:stop:step, width = step), ``"400:700:10:5"`` (with width),
        or a comma list of centres ``"365,550,850"`` (each band 10 nm wide, or narrower so that
        neighbours do not overlap).
        """
        text = str(text).strip()
        if not text:
            raise BandError("the band spec is empty; use e.g. '300:1000:10' or '365,550,850'")
        usage = "use start:stop:step[:width] or a comma list of centres in nm"
        try:
            if ":" in text:
                parts = [float(p) for p in text.split(":")]
                if len(parts) not in (3, 4):
                    raise ValueError
            else:
                centres = np.array([float(p) for p in text.split(",")])
        except ValueError as exc:
            raise BandError(f"cannot read band spec {text!r}; {usage}") from exc
        if ":" in text:
            # numbers read; what remains wrong (width wider than the step, stop below start, ...) is named by
            # the constructor's own BandError, with the spec in front
            try:
                return cls.regular(*parts)
            except BandError as exc:
                raise BandError(f"band spec {text!r}: {exc}") from exc
        if centres.size > 1 and np.any(np.diff(centres) <= 0):
            raise BandError(f"band centres {centres.tolist()} are not strictly increasing")
        half = np.full(centres.size, 5.0)
        if centres.size > 1:
            gaps = np.diff(centres) / 2.0
            half[:-1] = np.minimum(half[:-1], gaps)
            half[1:] = np.minimum(half[1:], gaps)
        return cls(centres, centres - half, centres + half)


def default_bands() -> BandSet:
    """Return the default band set: 300-1000 nm, 10 nm steps, 10 nm wide (71 bands)."""
    return BandSet.regular(DEFAULT_BAND_START_NM, DEFAULT_BAND_STOP_NM, DEFAULT_BAND_STEP_NM)


def band_average(wavelength_nm: np.ndarray, values: np.ndarray, bands: BandSet, dataset: str) -> np.ndarray:
    """Average a tabulated spectrum over each band.

    The average is the trapezoidal integral of the piecewise-linear spectrum over the band, divided by
    its width.

    Parameters
    ----------
    wavelength_nm : ndarray, shape (M,)
        Sorted sample wavelengths of the dataset in nm.
    values : ndarray, shape (M,) or (M, K)
        Spectrum values (any unit; the result has the same unit).
    bands : BandSet
        Bands to average over.
    dataset : str
        Dataset name for error messages.

    Returns
    -------
    ndarray, shape (B,) or (B, K)
        Band averages.

    Raises
    ------
    BandError
        If any band reaches outside the dataset's wavelength range (no silent zeros or extrapolation).

    """
    wl = np.asarray(wavelength_nm, dtype=np.float64)
    v = np.asarray(values, dtype=np.float64)
    lo_ok = bands.lower_nm >= wl[0] - 1e-9
    hi_ok = bands.upper_nm <= wl[-1] + 1e-9
    if not (lo_ok.all() and hi_ok.all()):
        i = int(np.argmin(lo_ok & hi_ok))
        raise BandError(
            f"band {bands.lower_nm[i]:g}-{bands.upper_nm[i]:g} nm lies outside dataset '{dataset}', "
            f"which covers {wl[0]:g}-{wl[-1]:g} nm"
        )
    squeeze = v.ndim == 1
    if squeeze:
        v = v[:, None]
    out = np.empty((len(bands), v.shape[1]))
    for b in range(len(bands)):
        lo, hi = bands.lower_nm[b], bands.upper_nm[b]
        inner = (wl > lo) & (wl < hi)
        x = np.concatenate(([lo], wl[inner], [hi]))
        y = np.stack([np.interp(x, wl, v[:, k]) for k in range(v.shape[1])], axis=1)
        out[b] = np.trapezoid(y, x, axis=0) / (hi - lo)
    return out[:, 0] if squeeze else out
