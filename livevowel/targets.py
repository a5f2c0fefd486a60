"""Vowel target sets: what a speaker aims at, and how close an attempt came.

A target set is one YAML file (see ``targets/README.md`` for the format). It
models one accent or language for one speaker group and lists the vowel
targets, each with a centre (F1, F2, optional F3) and a region around it.

Regions
-------
Every target carries a 2x2 covariance in Hz over (F1, F2) -- its "one SD"
ellipse -- and a *hit size* in SD units. The file can give the spread as

* ``sd``: standard deviations of F1 and F2 with their correlation;
* ``ellipse``: the hit region drawn explicitly (two semi-axes and the angle
  of the first axis from the F1 axis towards F2); the SD ellipse is that
  ellipse divided by the hit size;
* ``polygon``: the hit region as a polygon around the centre (it must wind
  once around the centre, each vertex visible from it). Its covariance is
  taken from the polygon's area moments, scaled so that an elliptical
  polygon gives back the ellipse's covariance;
* nothing, when the set has a ``default_spread`` (a fraction of the centre
  frequency per formant; the file must say this is an assumption).

Distance, hit and score
-----------------------
``distance`` is the Mahalanobis distance (Mahalanobis 1936) from the centre
in SD units; for a polygon it is the radial distance relative to the polygon
boundary, times the hit size (so it equals the hit size on the boundary,
as for an ellipse). A point is a *hit* when ``distance <= hit_size_sd``.

The closeness score (0-100) is ``100 * 2 ** (-(d / h) ** 2)`` with ``d``
the distance and ``h`` the hit size: 100 at the centre, exactly
:data:`BOUNDARY_SCORE` (50) on the edge of the region, 6 at twice the hit
size, below 1 at 2.6 times. So "50 or more" is the same as "a hit", and the
score falls off the way the spread of the speakers measured does
(a Gaussian in the distance).

Sets written in Bark are converted to Hz when loaded: centres exactly
(Traunmüller 1990), spreads through the local slope of the scale at the
centre (a first-order approximation).
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
import yaml

from livevowel.dsp.scales import bark_to_hz
from livevowel.errors import UserError

__all__ = [
    "GROUPS", "UNITS", "DEFAULT_HIT_SIZE_SD", "BOUNDARY_SCORE", "PLAUSIBLE_HZ",
    "Target", "TargetSet", "targets_dir", "shipped_sets", "load_target_set",
    "parse_target_set", "closeness_from_distance",
]

#: Speaker groups a set can be written for.
GROUPS: tuple[str, ...] = ("adult_male", "adult_female", "child", "any")
#: Units a set can be written in (as spelt in the file).
UNITS: tuple[str, ...] = ("Hz", "Bark")
#: Hit size (SD units) when neither the target nor the set gives one.
DEFAULT_HIT_SIZE_SD = 2.0
#: Closeness score on the edge of the hit region.
BOUNDARY_SCORE = 50.0
#: Plausible centre frequencies (Hz) for an adult or child voice.
PLAUSIBLE_HZ: dict[str, tuple[float, float]] = {
    "f1": (150.0, 1400.0),
    "f2": (400.0, 3800.0),
    "f3": (1200.0, 5000.0),
}

_SET_KEYS = {
    "title": True, "accent": True, "group": True, "units": True, "source": True,
    "targets": True, "default_spread": False, "default_hit_size_sd": False, "notes": False,
}
_SOURCE_KEYS = {"citation": True, "from_memory": True, "table": False, "notes": False}
_DEFAULT_SPREAD_KEYS = {"f1_fraction": True, "f2_fraction": True, "correlation": False, "assumption": True}
_TARGET_KEYS = {
    "id": True, "ipa": True, "words": True, "lexical_set": False, "f1": True, "f2": True, "f3": False,
    "sd": False, "ellipse": False, "polygon": False, "hit_size_sd": False, "notes": False,
}
_SD_KEYS = {"f1": True, "f2": True, "correlation": False}
_ELLIPSE_KEYS = {"semi_axes": True, "angle_deg": False}
_ID_RE = re.compile(r"^[a-z0-9][a-z0-9_.-]*$")


def closeness_from_distance(distance_sd, hit_size_sd):
    """Closeness score 0..100 from a distance and a hit size (both in SD units).

    ``100 * 2 ** (-(d / h) ** 2)``: 100 at the centre, 50 on the hit boundary.
    NaN distances give NaN.
    """
    d = np.asarray(distance_sd, dtype=float) / float(hit_size_sd)
    return 100.0 * np.exp2(-(d * d))


# ----------------------------------------------------------------------------
# Target
# ----------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class Target:
    """One vowel target: centre in Hz, a region, and how it is labelled.

    Attributes
    ----------
    id : str
        Short identifier, unique in its set (lower case).
    ipa : str
        IPA symbol(s).
    words : tuple of str
        Example words.
    lexical_set : str or None
        Wells (1982) lexical-set keyword, e.g. ``"FLEECE"``.
    f1_hz, f2_hz : float
        Centre in Hz.
    f3_hz : float or None
        Third formant in Hz when the source gives it.
    cov_hz : ndarray, shape (2, 2)
        Covariance of (F1, F2) in Hz^2 (the one-SD ellipse).
    hit_size_sd : float
        Radius of the hit region in SD units.
    spread_kind : str
        ``"sd"``, ``"ellipse"``, ``"polygon"`` or ``"default"`` (the set's
        assumed spread).
    polygon_hz : ndarray or None, shape (m, 2)
        The hit region as (F1, F2) vertices in Hz, for polygon targets.
    notes : str or None
    """

    id: str
    ipa: str
    words: tuple[str, ...]
    lexical_set: str | None
    f1_hz: float
    f2_hz: float
    f3_hz: float | None
    cov_hz: np.ndarray = field(repr=False)
    hit_size_sd: float = DEFAULT_HIT_SIZE_SD
    spread_kind: str = "sd"
    polygon_hz: np.ndarray | None = field(default=None, repr=False)
    notes: str | None = None

    def __post_init__(self) -> None:
        cov = np.array(self.cov_hz, dtype=float).reshape(2, 2)
        if not (cov[0, 0] > 0 and cov[1, 1] > 0 and np.linalg.det(cov) > 0):
            raise ValueError(f"target {self.id!r}: covariance must be positive definite")
        cov.setflags(write=False)
        object.__setattr__(self, "cov_hz", cov)
        icov = np.linalg.inv(cov)
        icov.setflags(write=False)
        object.__setattr__(self, "_icov", icov)
        object.__setattr__(self, "_icov_list", icov.tolist())
        if self.polygon_hz is not None:
            poly = np.array(self.polygon_hz, dtype=float).reshape(-1, 2)
            poly.setflags(write=False)
            object.__setattr__(self, "polygon_hz", poly)

    # -- spread in plain numbers ------------------------------------------------
    @property
    def centre_hz(self) -> np.ndarray:
        """``(F1, F2)`` in Hz."""
        return np.array([self.f1_hz, self.f2_hz])

    @property
    def sd_hz(self) -> tuple[float, float]:
        """Standard deviations of F1 and F2 in Hz."""
        return (float(math.sqrt(self.cov_hz[0, 0])), float(math.sqrt(self.cov_hz[1, 1])))

    @property
    def correlation(self) -> float:
        """Correlation of F1 and F2 within the region."""
        s1, s2 = self.sd_hz
        return float(self.cov_hz[0, 1] / (s1 * s2))

    def spread_label(self) -> str:
        """Short text for tables, e.g. ``'sd 34/186 r=+0.00'``."""
        s1, s2 = self.sd_hz
        base = f"sd {s1:.0f}/{s2:.0f} r={self.correlation:+.2f}"
        if self.spread_kind == "polygon":
            return f"polygon {len(self.polygon_hz)} pts (~{base})"
        if self.spread_kind == "ellipse":
            return f"ellipse (~{base})"
        if self.spread_kind == "default":
            return f"{base} (assumed)"
        return base

    # -- geometry ---------------------------------------------------------------
    def distance(self, f1_hz, f2_hz):
        """Distance from the centre in SD units (Mahalanobis; polygon: see module doc).

        Parameters
        ----------
        f1_hz, f2_hz : float or array_like
            Measured F1 and F2 in Hz (NaN allowed: gives NaN).

        Returns
        -------
        float or ndarray
            Same shape as the broadcast inputs.
        """
        ic = self._icov  # type: ignore[attr-defined]
        if self.polygon_hz is None and isinstance(f1_hz, (int, float)) and isinstance(f2_hz, (int, float)):
            # Scalar fast path (one frame at a time, as the live display asks).
            a, b = float(f1_hz) - self.f1_hz, float(f2_hz) - self.f2_hz
            il = self._icov_list  # type: ignore[attr-defined]
            q = il[0][0] * a * a + 2.0 * il[0][1] * a * b + il[1][1] * b * b
            return math.sqrt(q) if q > 0 else (0.0 if q == q else math.nan)
        f1 = np.asarray(f1_hz, dtype=float)
        f2 = np.asarray(f2_hz, dtype=float)
        d1, d2 = np.broadcast_arrays(f1 - self.f1_hz, f2 - self.f2_hz)
        if self.polygon_hz is not None:
            out = self.hit_size_sd * _polygon_gauge(self.polygon_hz, self.centre_hz, d1, d2)
        else:
            q = ic[0, 0] * d1 * d1 + 2.0 * ic[0, 1] * d1 * d2 + ic[1, 1] * d2 * d2
            out = np.sqrt(np.maximum(q, 0.0))
        return float(out) if out.ndim == 0 else out

    def contains(self, f1_hz, f2_hz):
        """True where (F1, F2) in Hz lies inside the region at the hit size (NaN: False)."""
        d = self.distance(f1_hz, f2_hz)
        if isinstance(d, float):
            return d <= self.hit_size_sd
        inside = np.asarray(d) <= self.hit_size_sd
        return bool(inside) if inside.ndim == 0 else inside

    def closeness(self, f1_hz, f2_hz):
        """Closeness score 0..100 (100 at the centre, 50 on the hit boundary; NaN in gives NaN)."""
        d = self.distance(f1_hz, f2_hz)
        if isinstance(d, float):
            r = d / self.hit_size_sd
            return 100.0 * 2.0 ** (-(r * r))
        return closeness_from_distance(d, self.hit_size_sd)

    def outline_hz(self, n: int = 64, *, size_sd: float | None = None) -> np.ndarray:
        """Boundary of the region as an ``(n, 2)`` array of (F1, F2) in Hz, for drawing.

        Parameters
        ----------
        n : int
            Number of points (the outline is closed implicitly: the last
            point is not a repeat of the first).
        size_sd : float, keyword-only, optional
            Size in SD units; default the target's hit size. Polygons are
            scaled about the centre by ``size_sd / hit_size_sd``.
        """
        if n < 3:
            raise ValueError(f"outline_hz: n must be at least 3, got {n}")
        size = self.hit_size_sd if size_sd is None else float(size_sd)
        if not size > 0:
            raise ValueError(f"outline_hz: size_sd must be positive, got {size_sd!r}")
        t = np.linspace(0.0, 2.0 * np.pi, n, endpoint=False)
        c = self.centre_hz
        if self.polygon_hz is not None:
            # Walk the boundary: for each direction, where the ray leaves the polygon.
            u = np.column_stack([np.cos(t), np.sin(t)]) * np.sqrt(np.diag(self.cov_hz))
            g = _polygon_gauge(self.polygon_hz, c, u[:, 0], u[:, 1])
            return c + u / g[:, None] * (size / self.hit_size_sd)
        chol = np.linalg.cholesky(self.cov_hz)
        circle = np.column_stack([np.cos(t), np.sin(t)])
        return c + size * circle @ chol.T

    def mapped(self, factors: Sequence[float]) -> "Target":
        """This target with every frequency multiplied by per-formant factors.

        Parameters
        ----------
        factors : (c1, c2) or (c1, c2, c3)
            Multipliers for F1, F2 (and F3; default c2). Centres, spreads and
            polygon vertices scale alike, correlations are unchanged.
        """
        c1, c2 = float(factors[0]), float(factors[1])
        c3 = float(factors[2]) if len(factors) > 2 else c2
        if not (c1 > 0 and c2 > 0 and c3 > 0):
            raise ValueError(f"mapped: factors must be positive, got {tuple(factors)}")
        d = np.diag([c1, c2])
        return replace(
            self,
            f1_hz=self.f1_hz * c1,
            f2_hz=self.f2_hz * c2,
            f3_hz=None if self.f3_hz is None else self.f3_hz * c3,
            cov_hz=d @ self.cov_hz @ d,
            polygon_hz=None if self.polygon_hz is None else self.polygon_hz * np.array([c1, c2]),
        )

    def matches(self, label: str) -> bool:
        """True when ``label`` is this target's id, IPA symbol or lexical set (case-insensitive)."""
        key = str(label).strip()
        return key.lower() == self.id or key == self.ipa or (
            self.lexical_set is not None and key.upper() == self.lexical_set.upper())


def _strip_length(ipa: str) -> str:
    return ipa.replace("ː", "").replace("ˑ", "").strip()


def _polygon_gauge(poly: np.ndarray, centre: np.ndarray, d1, d2) -> np.ndarray:
    """Radial distance of offsets (d1, d2) from ``centre`` relative to the polygon edge.

    1 on the boundary, <1 inside. The polygon must be star-shaped about the centre.
    """
    d1 = np.asarray(d1, dtype=float)
    d2 = np.asarray(d2, dtype=float)
    shape = np.broadcast(d1, d2).shape
    v = np.column_stack([np.ravel(np.broadcast_to(d1, shape)), np.ravel(np.broadcast_to(d2, shape))])
    a = poly - centre                      # (m, 2) edge starts relative to centre
    b = np.roll(a, -1, axis=0)             # edge ends
    e = b - a
    # Solve t*v = a + s*e for each (point, edge): cross products.
    cross = lambda x, y: x[..., 0] * y[..., 1] - x[..., 1] * y[..., 0]  # noqa: E731
    denom = cross(v[:, None, :], e[None, :, :])                           # (p, m)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = cross(a[None, :, :], e[None, :, :]) / denom                   # ray parameter
        s = cross(a[None, :, :], v[:, None, :]) / denom                   # edge parameter
        ok = (np.abs(denom) > 0) & (s >= -1e-12) & (s <= 1 + 1e-12) & (t > 0)
        t = np.where(ok, t, np.inf)
        tmin = t.min(axis=1)
        g = 1.0 / tmin
    zero = (v[:, 0] == 0) & (v[:, 1] == 0)
    g = np.where(zero, 0.0, g)
    g = np.where(np.isnan(v).any(axis=1), np.nan, g)
    return g.reshape(shape)


def _polygon_cov(poly: np.ndarray, centre: np.ndarray, hit_size_sd: float) -> np.ndarray:
    """Covariance (Hz^2) whose ellipse at ``hit_size_sd`` has the polygon's area moments.

    For a uniform ellipse of semi-axes (k s1, k s2) the second area moment
    about the centre is k^2 s^2 / 4, so cov = 4 M / k^2.
    """
    a = poly - centre
    b = np.roll(a, -1, axis=0)
    area = 0.5 * np.abs(a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0])
    m = np.zeros((2, 2))
    for ai, bi, ar in zip(a, b, area):
        m += ar / 6.0 * (np.outer(ai, ai) + np.outer(bi, bi) + 0.5 * (np.outer(ai, bi) + np.outer(bi, ai)))
    m /= area.sum()
    return 4.0 * m / hit_size_sd ** 2


# ----------------------------------------------------------------------------
# TargetSet
# ----------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class TargetSet:
    """A set of vowel targets for one accent and speaker group.

    Attributes
    ----------
    id : str
        Name of the set (the file name without ``.yaml``).
    title, accent : str
        What the set is and which accent or language it models.
    group : str
        One of :data:`GROUPS`.
    units : str
        Units the file is written in (``"Hz"`` or ``"Bark"``); values held
        here are always in Hz.
    source : str
        Citation of the published source.
    from_memory : bool
        True when the values were entered from memory, not copied from the table.
    targets : tuple of Target
    default_hit_size_sd : float
    source_table, notes, spread_assumption : str or None
        Table in the source, free notes, and the stated assumption behind a
        default spread.
    path : Path or None
        File the set was read from.
    """

    id: str
    title: str
    accent: str
    group: str
    units: str
    source: str
    from_memory: bool
    targets: tuple[Target, ...]
    default_hit_size_sd: float = DEFAULT_HIT_SIZE_SD
    source_table: str | None = None
    notes: str | None = None
    spread_assumption: str | None = None
    path: Path | None = None

    def __post_init__(self) -> None:
        ell = [i for i, t in enumerate(self.targets) if t.polygon_hz is None]
        object.__setattr__(self, "_ell", np.array(ell, dtype=int))
        object.__setattr__(self, "_poly", [i for i, t in enumerate(self.targets) if t.polygon_hz is not None])
        object.__setattr__(self, "_centres", np.array([[self.targets[i].f1_hz, self.targets[i].f2_hz] for i in ell])
                           .reshape(-1, 2))
        object.__setattr__(self, "_icovs", np.array([self.targets[i]._icov for i in ell]).reshape(-1, 2, 2))

    def __len__(self) -> int:
        return len(self.targets)

    def __iter__(self):
        return iter(self.targets)

    @property
    def ids(self) -> tuple[str, ...]:
        """Target ids in file order."""
        return tuple(t.id for t in self.targets)

    def find(self, label: str) -> Target | None:
        """Target whose id, IPA symbol or lexical set is ``label``, or None.

        Ids are tried first; then IPA symbols and lexical sets; then IPA with
        length marks ignored (``"i"`` finds ``"iː"``) when that is unambiguous.
        """
        key = str(label).strip()
        for t in self.targets:
            if t.id == key.lower():
                return t
        for t in self.targets:
            if t.matches(key):
                return t
        base = _strip_length(key)  # "i" finds "iː" when the set marks length
        hits = [t for t in self.targets if _strip_length(t.ipa) == base]
        return hits[0] if len(hits) == 1 else None

    def get(self, key: str) -> Target:
        """Target by id (or IPA symbol or lexical set); UserError if there is none."""
        t = self.find(key)
        if t is None:
            raise UserError(f"target set {self.id}: no target {key!r} (ids: {', '.join(self.ids)})")
        return t

    def distances(self, f1_hz, f2_hz) -> np.ndarray:
        """Distance (SD units) to every target: shape ``inputs.shape + (n_targets,)``."""
        f1, f2 = np.broadcast_arrays(np.asarray(f1_hz, dtype=float), np.asarray(f2_hz, dtype=float))
        out = np.empty(f1.shape + (len(self.targets),))
        if len(self._ell):
            d1 = f1[..., None] - self._centres[:, 0]
            d2 = f2[..., None] - self._centres[:, 1]
            ic = self._icovs
            q = ic[:, 0, 0] * d1 * d1 + 2.0 * ic[:, 0, 1] * d1 * d2 + ic[:, 1, 1] * d2 * d2
            out[..., self._ell] = np.sqrt(np.maximum(q, 0.0))
        for i in self._poly:
            out[..., i] = self.targets[i].distance(f1, f2)
        return out

    def classify(self, f1_hz, f2_hz) -> tuple[np.ndarray, np.ndarray]:
        """Nearest target for many points at once.

        Returns
        -------
        index : ndarray of int
            Index into :attr:`targets` of the nearest target (-1 where the
            input is NaN).
        distance : ndarray
            Its distance in SD units (NaN where the input is NaN).
        """
        d = self.distances(f1_hz, f2_hz)
        bad = np.isnan(d).any(axis=-1)
        idx = np.argmin(np.where(np.isnan(d), np.inf, d), axis=-1)
        dist = np.take_along_axis(d, idx[..., None], axis=-1)[..., 0]
        return np.where(bad, -1, idx), np.where(bad, np.nan, dist)

    def nearest(self, f1_hz: float, f2_hz: float) -> tuple[Target, float]:
        """The nearest target by Mahalanobis distance and that distance (SD units)."""
        if not (np.isfinite(f1_hz) and np.isfinite(f2_hz)):
            raise ValueError("nearest: F1 and F2 must be finite numbers (measure a vowel first)")
        d = self.distances(float(f1_hz), float(f2_hz))
        i = int(np.argmin(d))
        return self.targets[i], float(d[i])

    def centres_hz(self) -> np.ndarray:
        """``(n_targets, 3)`` array of F1, F2, F3 in Hz (NaN where F3 is not given)."""
        return np.array([[t.f1_hz, t.f2_hz, np.nan if t.f3_hz is None else t.f3_hz] for t in self.targets])

    def mapped(self, factors: Sequence[float], **changes: Any) -> "TargetSet":
        """Every target multiplied by per-formant ``factors`` (see :meth:`Target.mapped`).

        Keyword arguments replace set attributes (e.g. ``id``, ``title``, ``group``).
        """
        return replace(self, targets=tuple(t.mapped(factors) for t in self.targets), **changes)


# ----------------------------------------------------------------------------
# Finding and loading sets
# ----------------------------------------------------------------------------

def targets_dir() -> Path:
    """Folder holding the shipped target sets.

    The top-level ``targets/`` folder of the source tree (the package is
    installed editable); ``LIVEVOWEL_TARGETS_DIR`` overrides it. This is the
    one place that decides, so it can change when sets ship inside the package.
    """
    env = os.environ.get("LIVEVOWEL_TARGETS_DIR")
    if env:
        return Path(env)
    return Path(__file__).resolve().parent.parent / "targets"


def shipped_sets() -> dict[str, Path]:
    """Shipped set names (file names without ``.yaml``) and their paths, sorted by name."""
    folder = targets_dir()
    if not folder.is_dir():
        return {}
    return {p.stem: p for p in sorted(folder.glob("*.yaml"))}


def load_target_set(spec: "str | os.PathLike | TargetSet") -> TargetSet:
    """Load a target set by shipped name or from a YAML file.

    Parameters
    ----------
    spec : str, path or TargetSet
        A shipped set's name (see :func:`shipped_sets`), or the path of a
        YAML file. A TargetSet is returned unchanged.

    Raises
    ------
    UserError
        When nothing by that name or path exists, or the file is not a valid
        set (the message names the file, the target id and the key).
    """
    if isinstance(spec, TargetSet):
        return spec
    text = os.fspath(spec)
    shipped = shipped_sets()
    if text in shipped:
        path = shipped[text]
    else:
        path = Path(text).expanduser()
        if not path.is_file():
            known = ", ".join(shipped) or "none"
            raise UserError(f"no target set {text!r}: not a shipped set ({known}) and no such file")
    try:
        raw = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise UserError(f"{path}: cannot read target set ({exc.strerror}); check the path") from None
    except UnicodeDecodeError:
        raise UserError(f"{path}: not UTF-8 text; save the file as UTF-8") from None
    try:
        data = yaml.load(raw, Loader=_StrictLoader)  # noqa: S506 - safe loader subclass
    except _DuplicateKey as exc:
        raise UserError(f"{path}: line {exc.line}: key {exc.key!r} appears twice; keep one") from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" line {mark.line + 1}:" if mark is not None else ""
        raise UserError(f"{path}:{where} not valid YAML ({getattr(exc, 'problem', exc)}); fix the file") from None
    return parse_target_set(data, source=str(path), set_id=path.stem, path=path)


class _DuplicateKey(yaml.YAMLError):
    def __init__(self, key: Any, line: int) -> None:
        super().__init__(f"duplicate key {key!r}")
        self.key, self.line = key, line


class _StrictLoader(getattr(yaml, "CSafeLoader", yaml.SafeLoader)):  # type: ignore[misc]
    """Safe YAML loader (libyaml when present) that refuses duplicate keys.

    Plain YAML keeps the last of two equal keys silently.
    """


def _construct_mapping(loader, node: yaml.MappingNode, deep: bool = False):
    seen = set()
    for key_node, _ in node.value:
        key = loader.construct_object(key_node, deep=True)
        try:
            if key in seen:
                raise _DuplicateKey(key, key_node.start_mark.line + 1)
            seen.add(key)
        except TypeError:  # unhashable key; let the normal constructor complain
            pass
    return loader.construct_mapping(node, deep=deep)


_StrictLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)


# ----------------------------------------------------------------------------
# Validation
# ----------------------------------------------------------------------------

class _Where:
    """Builds error messages naming the file, the target and the key."""

    def __init__(self, source: str) -> None:
        self.source = source

    def error(self, msg: str, *, target: str | None = None, key: str | None = None) -> UserError:
        parts = [self.source]
        if target is not None:
            parts.append(f"target {target!r}")
        if key is not None:
            parts.append(f"key {key!r}")
        return UserError(": ".join(parts) + ": " + msg)


def _check_keys(data: Any, allowed: Mapping[str, bool], w: _Where, *, what: str,
                target: str | None = None, prefix: str = "") -> Mapping[str, Any]:
    if not isinstance(data, Mapping):
        raise w.error(f"expected {what} as 'key: value' lines, got {type(data).__name__}",
                      target=target, key=prefix.rstrip(".") or None)
    for k in data:
        if k not in allowed:
            raise w.error(f"unknown key (known: {', '.join(allowed)})", target=target, key=f"{prefix}{k}")
    for k, required in allowed.items():
        if required and (k not in data or data[k] is None):
            raise w.error("missing value", target=target, key=f"{prefix}{k}")
    return data


def _text(value: Any, w: _Where, *, key: str, target: str | None = None) -> str:
    if not isinstance(value, str) or not value.strip():
        raise w.error(f"expected text, got {value!r}", target=target, key=key)
    return value.strip()


def _number(value: Any, w: _Where, *, key: str, target: str | None = None,
            positive: bool = False, lo: float | None = None, hi: float | None = None) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise w.error(f"expected a number, got {value!r}", target=target, key=key)
    v = float(value)
    if positive and not v > 0:
        raise w.error(f"must be above 0, got {value!r}", target=target, key=key)
    if lo is not None and v < lo:
        raise w.error(f"must be at least {lo:g}, got {value!r}", target=target, key=key)
    if hi is not None and v > hi:
        raise w.error(f"must be at most {hi:g}, got {value!r}", target=target, key=key)
    return v


def _to_hz(value: float, units: str) -> float:
    if units == "Hz":
        return value
    try:
        return float(bark_to_hz(value))
    except ValueError:
        return float("nan")


def _hz_slope(value: float, units: str) -> float:
    """d(Hz)/d(unit) at ``value`` (1 for Hz)."""
    if units == "Hz":
        return 1.0
    h = 1e-4
    return float((bark_to_hz(value + h) - bark_to_hz(value - h)) / (2 * h))


def _plausible(name: str, value_hz: float, raw: float, units: str, w: _Where, target: str) -> None:
    lo, hi = PLAUSIBLE_HZ[name]
    if not (lo <= value_hz <= hi):
        shown = f"{raw:g} Hz" if units == "Hz" else f"{raw:g} Bark ({value_hz:.0f} Hz)"
        raise w.error(f"{shown} is outside the plausible {name.upper()} range {lo:.0f}-{hi:.0f} Hz; "
                      f"check the value and the set's units", target=target, key=name)


def parse_target_set(data: Any, *, source: str, set_id: str, path: Path | None = None) -> TargetSet:
    """Validate a parsed YAML mapping and build the :class:`TargetSet`.

    Parameters
    ----------
    data : mapping
        The file's contents as loaded by YAML.
    source : str
        Name used in error messages (usually the file path).
    set_id : str
        The set's name.
    path : Path, optional
        File it came from.
    """
    w = _Where(source)
    if data is None:
        raise w.error("the file is empty; see targets/README.md for the format")
    _check_keys(data, _SET_KEYS, w, what="a target set")
    title = _text(data["title"], w, key="title")
    accent = _text(data["accent"], w, key="accent")
    group = _text(data["group"], w, key="group")
    if group not in GROUPS:
        raise w.error(f"{group!r} is not a speaker group (use one of {', '.join(GROUPS)})", key="group")
    units_raw = _text(data["units"], w, key="units")
    units = {u.lower(): u for u in UNITS}.get(units_raw.lower())
    if units is None:
        raise w.error(f"{units_raw!r} is not a known unit (use {' or '.join(UNITS)})", key="units")

    src = _check_keys(data["source"], _SOURCE_KEYS, w, what="the source", prefix="source.")
    citation = _text(src["citation"], w, key="source.citation")
    from_memory = src["from_memory"]
    if not isinstance(from_memory, bool):
        raise w.error(f"expected true or false, got {from_memory!r}", key="source.from_memory")
    table = _text(src["table"], w, key="source.table") if src.get("table") is not None else None
    notes = "\n".join(
        _text(x, w, key=k) for k, x in (("source.notes", src.get("notes")), ("notes", data.get("notes")))
        if x is not None) or None

    hit_default = DEFAULT_HIT_SIZE_SD
    if data.get("default_hit_size_sd") is not None:
        hit_default = _number(data["default_hit_size_sd"], w, key="default_hit_size_sd", positive=True, hi=10)

    spread_default = None
    assumption = None
    if data.get("default_spread") is not None:
        ds = _check_keys(data["default_spread"], _DEFAULT_SPREAD_KEYS, w, what="a default spread",
                         prefix="default_spread.")
        spread_default = (
            _number(ds["f1_fraction"], w, key="default_spread.f1_fraction", positive=True, hi=1),
            _number(ds["f2_fraction"], w, key="default_spread.f2_fraction", positive=True, hi=1),
            _number(ds.get("correlation", 0.0), w, key="default_spread.correlation", lo=-0.99, hi=0.99),
        )
        assumption = _text(ds["assumption"], w, key="default_spread.assumption")

    items = data["targets"]
    if not isinstance(items, list) or not items:
        raise w.error("expected a list of targets ('- id: ...' entries)", key="targets")
    targets: list[Target] = []
    seen: dict[str, int] = {}
    for n, item in enumerate(items, start=1):
        tid = item.get("id") if isinstance(item, Mapping) else None
        label = tid if isinstance(tid, str) else f"#{n}"
        t = _parse_target(item, w, label=label, units=units, hit_default=hit_default,
                          spread_default=spread_default)
        if t.id in seen:
            raise w.error(f"duplicate id (also target #{seen[t.id]}); give each target its own id",
                          target=t.id, key="id")
        seen[t.id] = n
        targets.append(t)

    return TargetSet(
        id=set_id, title=title, accent=accent, group=group, units=units, source=citation,
        from_memory=from_memory, targets=tuple(targets), default_hit_size_sd=hit_default,
        source_table=table, notes=notes, spread_assumption=assumption, path=path,
    )


def _parse_target(item: Any, w: _Where, *, label: str, units: str, hit_default: float,
                  spread_default: tuple[float, float, float] | None) -> Target:
    _check_keys(item, _TARGET_KEYS, w, what="a target", target=label)
    tid = _text(item["id"], w, key="id", target=label)
    if not _ID_RE.match(tid):
        raise w.error("ids are lower-case letters, digits, '-', '_' or '.', starting with a letter or digit",
                      target=tid, key="id")
    ipa = _text(item["ipa"], w, key="ipa", target=tid)
    words_raw = item["words"]
    if isinstance(words_raw, str):
        words_raw = [words_raw]
    if not isinstance(words_raw, list) or not words_raw:
        raise w.error("expected one or more example words", target=tid, key="words")
    words = tuple(_text(x, w, key="words", target=tid) for x in words_raw)
    lex = _text(item["lexical_set"], w, key="lexical_set", target=tid) if item.get("lexical_set") is not None else None

    raw = {}
    hz = {}
    for name in ("f1", "f2", "f3"):
        if item.get(name) is None:
            continue
        raw[name] = _number(item[name], w, key=name, target=tid, positive=True)
        hz[name] = _to_hz(raw[name], units)
        _plausible(name, hz[name], raw[name], units, w, tid)
    if hz["f2"] <= hz["f1"]:
        raise w.error(f"F2 ({raw['f2']:g} {units}) must be above F1 ({raw['f1']:g} {units})", target=tid, key="f2")
    if "f3" in hz and hz["f3"] <= hz["f2"]:
        raise w.error(f"F3 ({raw['f3']:g} {units}) must be above F2 ({raw['f2']:g} {units})", target=tid, key="f3")

    hit = hit_default
    if item.get("hit_size_sd") is not None:
        hit = _number(item["hit_size_sd"], w, key="hit_size_sd", target=tid, positive=True, hi=10)

    given = [k for k in ("sd", "ellipse", "polygon") if item.get(k) is not None]
    if len(given) > 1:
        raise w.error(f"give only one of sd, ellipse or polygon (found {', '.join(given)})", target=tid, key=given[1])
    j = np.diag([_hz_slope(raw["f1"], units), _hz_slope(raw["f2"], units)])
    polygon = None
    if not given:
        if spread_default is None:
            raise w.error("no spread: give sd, ellipse or polygon, or a default_spread for the set",
                          target=tid, key="sd")
        p1, p2, r = spread_default
        s1, s2 = p1 * hz["f1"], p2 * hz["f2"]
        cov = np.array([[s1 * s1, r * s1 * s2], [r * s1 * s2, s2 * s2]])
        kind = "default"
    elif given[0] == "sd":
        sd = _check_keys(item["sd"], _SD_KEYS, w, what="standard deviations", target=tid, prefix="sd.")
        s1 = _number(sd["f1"], w, key="sd.f1", target=tid, positive=True)
        s2 = _number(sd["f2"], w, key="sd.f2", target=tid, positive=True)
        r = _number(sd.get("correlation", 0.0), w, key="sd.correlation", target=tid, lo=-0.99, hi=0.99)
        cov = j @ np.array([[s1 * s1, r * s1 * s2], [r * s1 * s2, s2 * s2]]) @ j
        kind = "sd"
    elif given[0] == "ellipse":
        el = _check_keys(item["ellipse"], _ELLIPSE_KEYS, w, what="an ellipse", target=tid, prefix="ellipse.")
        axes = el["semi_axes"]
        if not isinstance(axes, list) or len(axes) != 2:
            raise w.error("expected two semi-axes [first, second]", target=tid, key="ellipse.semi_axes")
        a = _number(axes[0], w, key="ellipse.semi_axes", target=tid, positive=True)
        b = _number(axes[1], w, key="ellipse.semi_axes", target=tid, positive=True)
        ang = math.radians(_number(el.get("angle_deg", 0.0), w, key="ellipse.angle_deg", target=tid,
                                   lo=-180, hi=180))
        rot = np.array([[math.cos(ang), -math.sin(ang)], [math.sin(ang), math.cos(ang)]])
        cov = j @ (rot @ np.diag([a * a, b * b]) @ rot.T / hit ** 2) @ j
        kind = "ellipse"
    else:
        pts = item["polygon"]
        if not isinstance(pts, list) or len(pts) < 3:
            raise w.error("expected a list of at least 3 [F1, F2] points", target=tid, key="polygon")
        verts = []
        for p in pts:
            if not isinstance(p, list) or len(p) != 2:
                raise w.error(f"each point is [F1, F2], got {p!r}", target=tid, key="polygon")
            v1 = _number(p[0], w, key="polygon", target=tid, positive=True)
            v2 = _number(p[1], w, key="polygon", target=tid, positive=True)
            verts.append((_to_hz(v1, units), _to_hz(v2, units)))
        polygon = np.array(verts)
        if not np.all(np.isfinite(polygon)):
            raise w.error("a point is outside the range of the scale", target=tid, key="polygon")
        centre = np.array([hz["f1"], hz["f2"]])
        if not _winds_once(polygon - centre):
            raise w.error("the polygon must go once around the centre (F1, F2), every point visible from it",
                          target=tid, key="polygon")
        cov = _polygon_cov(polygon, centre, hit)
        kind = "polygon"

    notes = _text(item["notes"], w, key="notes", target=tid) if item.get("notes") is not None else None
    return Target(id=tid, ipa=ipa, words=words, lexical_set=lex, f1_hz=hz["f1"], f2_hz=hz["f2"],
                  f3_hz=hz.get("f3"), cov_hz=cov, hit_size_sd=hit, spread_kind=kind,
                  polygon_hz=polygon, notes=notes)


def _winds_once(rel: np.ndarray) -> bool:
    """True when the vertices (relative to the centre) turn once around it, always the same way."""
    ang = np.arctan2(rel[:, 1], rel[:, 0])
    step = np.diff(np.append(ang, ang[0]))
    step = (step + np.pi) % (2 * np.pi) - np.pi
    if np.any(np.abs(step) < 1e-9) or np.any(np.abs(np.abs(step) - np.pi) < 1e-9):
        return False
    if not (np.all(step > 0) or np.all(step < 0)):
        return False
    return bool(abs(abs(step.sum()) - 2 * np.pi) < 1e-6)
