"""Speaker profiles: fit a target set to one speaker's voice.

A child's vowels sit higher in F1 and F2 than a man's because the vocal tract
is shorter; to a first approximation every formant of a speaker is the
reference group's formant times one factor. A :class:`SpeakerProfile` is
made from a few calibration tokens (at least the corner vowels /i/, /a/ or
/ɑ/, and /u/) and estimates that factor relative to a target set's
reference group, Nearey (1978) style in the log domain:

    F_speaker = F_ref * exp(G_speaker - G_ref)

where ``G_speaker - G_ref`` is the mean over the calibrated vowels (each
vowel's tokens averaged first) and over F1 and F2 of
``ln F_token - ln F_target``. Comparing the *same* vowels on both sides keeps
the estimate fair when only a few vowels were recorded. That one factor is
applied to F1, F2 and F3 (``nearey-shared``). With five or more distinct
calibrated vowels the default ``auto`` method fits one factor per formant
instead (``nearey-per-formant``; F3 gets its own factor only when five or
more vowels have F3 on both sides, otherwise the shared one).

:meth:`SpeakerProfile.map_set` then maps every target -- centre, spread,
polygon -- into the speaker's own space (spreads scale with the centres,
since the factor is a ratio). Profiles are YAML files holding a pseudonymous
speaker id, the voice group, dates, the tokens and the transform; they are
written atomically and can be refitted as more tokens arrive
(:meth:`SpeakerProfile.with_tokens`).
"""

from __future__ import annotations

import datetime as _dt
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable, Mapping

import numpy as np
import yaml

from livevowel.errors import UserError
from livevowel.fileio import write_text_atomic
from livevowel.targets import GROUPS, PLAUSIBLE_HZ, TargetSet, load_target_set

__all__ = [
    "CalibrationToken", "Transform", "SpeakerProfile", "fit_transform", "load_profile",
    "METHODS", "PER_FORMANT_MIN_VOWELS", "CORNERS",
]

#: Transform methods a profile can ask for.
METHODS: tuple[str, ...] = ("auto", "nearey-shared", "nearey-per-formant")
#: Distinct calibrated vowels needed before ``auto`` fits one factor per formant.
PER_FORMANT_MIN_VOWELS = 5
#: Corner vowels a calibration must cover (IPA, length marks ignored).
CORNERS: dict[str, frozenset[str]] = {
    "/i/": frozenset({"i"}),
    "/a/ or /ɑ/": frozenset({"a", "ɑ", "ä"}),
    "/u/": frozenset({"u", "ʉ", "ɯ"}),
}
_FORMAT = "livevowel speaker profile"
_SPEAKER_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,39}$")


@dataclass(frozen=True)
class CalibrationToken:
    """One calibration vowel as measured (Hz).

    ``vowel`` is a target id, IPA symbol or lexical-set keyword of the
    reference set (e.g. ``"fleece"``, ``"i"`` or ``"FLEECE"``).
    """

    vowel: str
    f1_hz: float
    f2_hz: float
    f3_hz: float | None = None
    f0_hz: float | None = None
    time: str | None = None

    def __post_init__(self) -> None:
        for name in ("f1_hz", "f2_hz", "f3_hz", "f0_hz"):
            v = getattr(self, name)
            if v is None and name in ("f3_hz", "f0_hz"):
                continue
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not (math.isfinite(v) and v > 0):
                raise UserError(f"calibration token {self.vowel!r}: {name} must be a positive number of Hz, got {v!r}")
            object.__setattr__(self, name, float(v))

    def to_dict(self) -> dict[str, Any]:
        d = {"vowel": self.vowel, "f1_hz": round(self.f1_hz, 1), "f2_hz": round(self.f2_hz, 1)}
        for name in ("f3_hz", "f0_hz"):
            if getattr(self, name) is not None:
                d[name] = round(getattr(self, name), 1)
        if self.time is not None:
            d["time"] = self.time
        return d


@dataclass(frozen=True)
class Transform:
    """Reference-to-speaker mapping: multiply F1, F2, F3 by ``factors``.

    Attributes
    ----------
    method : str
        ``"nearey-shared"`` or ``"nearey-per-formant"``.
    factors : (float, float, float)
        Multipliers for F1, F2, F3 (speaker = reference * factor).
    reference_set, reference_group : str
        Id and speaker group of the set the factors are relative to.
    vowels : tuple of str
        Reference target ids the fit used.
    tokens_used : int
    """

    method: str
    factors: tuple[float, float, float]
    reference_set: str
    reference_group: str
    vowels: tuple[str, ...]
    tokens_used: int

    @property
    def log_ratios(self) -> tuple[float, float, float]:
        """``ln(factor)`` per formant: G_speaker - G_ref."""
        return tuple(math.log(f) for f in self.factors)  # type: ignore[return-value]

    def to_speaker(self, f1_hz, f2_hz):
        """Reference-space (F1, F2) in Hz to the speaker's space."""
        return np.asarray(f1_hz) * self.factors[0], np.asarray(f2_hz) * self.factors[1]

    def to_reference(self, f1_hz, f2_hz):
        """The speaker's (F1, F2) in Hz to the reference space."""
        return np.asarray(f1_hz) / self.factors[0], np.asarray(f2_hz) / self.factors[1]

    def to_dict(self) -> dict[str, Any]:
        return {
            "method": self.method,
            "reference_set": self.reference_set,
            "reference_group": self.reference_group,
            "factors": {k: round(v, 6) for k, v in zip(("f1", "f2", "f3"), self.factors)},
            "vowels": list(self.vowels),
            "tokens_used": self.tokens_used,
        }


def _base_ipa(ipa: str) -> str:
    return ipa.replace("ː", "").replace(":", "").strip()


def fit_transform(tokens: Iterable[CalibrationToken], reference: TargetSet, *,
                  method: str = "auto") -> Transform:
    """Estimate a speaker's :class:`Transform` relative to ``reference``.

    Parameters
    ----------
    tokens : iterable of CalibrationToken
        Measured calibration vowels (Hz). Tokens whose label matches no
        target of ``reference`` are ignored.
    reference : TargetSet
        The set whose speaker group the transform is relative to.
    method : str, keyword-only
        ``"auto"`` (per formant with at least :data:`PER_FORMANT_MIN_VOWELS`
        distinct vowels, otherwise shared), ``"nearey-shared"`` or
        ``"nearey-per-formant"``.

    Raises
    ------
    UserError
        When the tokens miss a corner vowel (see :data:`CORNERS`), or the
        per-formant method is asked for with too few vowels.
    """
    if method not in METHODS:
        raise UserError(f"unknown profile method {method!r}; use one of {', '.join(METHODS)}")
    per_vowel: dict[str, list[CalibrationToken]] = {}
    for tok in tokens:
        t = reference.find(tok.vowel)
        if t is not None:
            per_vowel.setdefault(t.id, []).append(tok)
    covered = {_base_ipa(reference.get(tid).ipa) for tid in per_vowel}
    missing = [name for name, ipas in CORNERS.items() if not covered & ipas]
    if missing:
        raise UserError(
            f"calibration against {reference.id} needs tokens of /i/, /a/ or /ɑ/, and /u/; "
            f"missing {', '.join(missing)}; record those vowels (labels: target id or IPA)")
    vowels = tuple(t.id for t in reference.targets if t.id in per_vowel)
    diffs = np.full((len(vowels), 3), np.nan)   # per vowel: mean ln F_token - ln F_target
    for i, tid in enumerate(vowels):
        t = reference.get(tid)
        toks = per_vowel[tid]
        diffs[i, 0] = np.mean([math.log(x.f1_hz) for x in toks]) - math.log(t.f1_hz)
        diffs[i, 1] = np.mean([math.log(x.f2_hz) for x in toks]) - math.log(t.f2_hz)
        f3s = [math.log(x.f3_hz) for x in toks if x.f3_hz is not None]
        if f3s and t.f3_hz is not None:
            diffs[i, 2] = np.mean(f3s) - math.log(t.f3_hz)
    chosen = method
    if method == "auto":
        chosen = "nearey-per-formant" if len(vowels) >= PER_FORMANT_MIN_VOWELS else "nearey-shared"
    if chosen == "nearey-per-formant" and len(vowels) < PER_FORMANT_MIN_VOWELS:
        raise UserError(f"the per-formant transform needs at least {PER_FORMANT_MIN_VOWELS} different vowels; "
                        f"got {len(vowels)} ({', '.join(vowels)}); use nearey-shared or record more vowels")
    shared = float(np.mean(diffs[:, :2]))
    if chosen == "nearey-shared":
        logs = (shared, shared, shared)
    else:
        n3 = int(np.sum(~np.isnan(diffs[:, 2])))
        d3 = float(np.nanmean(diffs[:, 2])) if n3 >= PER_FORMANT_MIN_VOWELS else shared
        logs = (float(np.mean(diffs[:, 0])), float(np.mean(diffs[:, 1])), d3)
    return Transform(
        method=chosen,
        factors=tuple(math.exp(v) for v in logs),  # type: ignore[arg-type]
        reference_set=reference.id,
        reference_group=reference.group,
        vowels=vowels,
        tokens_used=sum(len(v) for v in per_vowel.values()),
    )


@dataclass(frozen=True)
class SpeakerProfile:
    """One speaker's calibration and transform.

    Attributes
    ----------
    speaker_id : str
        A pseudonym or code (letters, digits, ``.``, ``_``, ``-``; up to 40
        characters) -- not a real name.
    voice_group : str
        One of :data:`livevowel.targets.GROUPS`.
    created, updated : str
        ISO dates.
    tokens : tuple of CalibrationToken
    transform : Transform
    method : str
        Method asked for (``"auto"`` by default); ``transform.method`` is
        the one used.
    """

    speaker_id: str
    voice_group: str
    created: str
    updated: str
    tokens: tuple[CalibrationToken, ...]
    transform: Transform
    method: str = "auto"
    notes: str | None = field(default=None)

    def __post_init__(self) -> None:
        _check_speaker(self.speaker_id, "speaker_id")
        if self.voice_group not in GROUPS:
            raise UserError(f"voice group {self.voice_group!r} is not one of {', '.join(GROUPS)}")

    @staticmethod
    def check_tokens(tokens: Iterable[CalibrationToken], reference: TargetSet) -> None:
        """Refuse new tokens that name no vowel of ``reference`` or cannot be a vowel: F1, F2 (F3)
        outside the plausible ranges of target sets (``livevowel.targets.PLAUSIBLE_HZ``, the
        limits ``targets check`` applies) or not ascending.

        Raises
        ------
        UserError
            One line naming the token and what to fix.
        """
        for tok in tokens:
            if reference.find(tok.vowel) is None:
                raise UserError(f"calibration token {tok.vowel!r}: not a vowel of {reference.id}; use a target id, "
                                f"IPA symbol or keyword (livevowel targets show {reference.id})")
            vals = [("f1", tok.f1_hz), ("f2", tok.f2_hz)] + ([("f3", tok.f3_hz)] if tok.f3_hz is not None else [])
            for name, v in vals:
                lo, hi = PLAUSIBLE_HZ[name]
                if not lo <= v <= hi:
                    raise UserError(f"calibration token {tok.vowel!r}: {name.upper()} {v:g} Hz is outside the "
                                    f"plausible range {lo:.0f}-{hi:.0f} Hz; check the value")
            for (n1, v1), (n2, v2) in zip(vals, vals[1:]):
                if not v1 < v2:
                    raise UserError(f"calibration token {tok.vowel!r}: {n1.upper()} {v1:g} Hz is not below "
                                    f"{n2.upper()} {v2:g} Hz; give them in order, VOWEL=F1,F2[,F3]")

    @classmethod
    def calibrate(cls, speaker_id: str, tokens: Iterable[CalibrationToken], reference: "TargetSet | str", *,
                  voice_group: str, method: str = "auto", today: "str | None" = None) -> "SpeakerProfile":
        """Make a profile from calibration tokens against a reference set (object, name or path)."""
        ref = load_target_set(reference)
        toks = tuple(tokens)
        cls.check_tokens(toks, ref)
        date = today or _dt.date.today().isoformat()
        return cls(speaker_id=speaker_id, voice_group=voice_group, created=date, updated=date,
                   tokens=toks, transform=fit_transform(toks, ref, method=method), method=method)

    def with_tokens(self, tokens: Iterable[CalibrationToken], reference: "TargetSet | str | None" = None, *,
                    today: "str | None" = None) -> "SpeakerProfile":
        """A refitted profile with ``tokens`` added (reference: the one used before by default)."""
        if reference is None:
            try:
                ref = load_target_set(self.transform.reference_set)
            except UserError:
                raise UserError(f"profile {self.speaker_id} was calibrated against {self.transform.reference_set!r}, "
                                "which is not a shipped set; give that set's file again") from None
        else:
            ref = load_target_set(reference)
        new = tuple(tokens)
        self.check_tokens(new, ref)
        toks = self.tokens + new
        return SpeakerProfile(speaker_id=self.speaker_id, voice_group=self.voice_group, created=self.created,
                              updated=today or _dt.date.today().isoformat(), tokens=toks,
                              transform=fit_transform(toks, ref, method=self.method), method=self.method,
                              notes=self.notes)

    def transform_for(self, ts: TargetSet) -> Transform:
        """The transform to use with ``ts``.

        The stored one when ``ts`` is the reference set or is written for the
        same speaker group (or for ``any``); otherwise one refitted from the
        stored tokens against ``ts``.
        """
        tr = self.transform
        if ts.id == tr.reference_set or ts.group in (tr.reference_group, "any"):
            return tr
        try:
            return fit_transform(self.tokens, ts, method=self.method)
        except UserError as exc:
            raise UserError(
                f"profile {self.speaker_id} was calibrated against {tr.reference_set} ({tr.reference_group}); "
                f"{ts.id} is for {ts.group} and the tokens do not fit it: {exc}") from None

    def map_set(self, ts: "TargetSet | str") -> TargetSet:
        """``ts`` with every target region mapped into this speaker's space."""
        ts = load_target_set(ts)
        tr = self.transform_for(ts)
        return ts.mapped(tr.factors, id=f"{ts.id}@{self.speaker_id}",
                         title=f"{ts.title} (mapped to speaker {self.speaker_id})", group=self.voice_group)

    # -- files ------------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "format": _FORMAT,
            "version": 1,
            "speaker": self.speaker_id,
            "voice_group": self.voice_group,
            "created": self.created,
            "updated": self.updated,
            "method": self.method,
            "transform": self.transform.to_dict(),
            "tokens": [t.to_dict() for t in self.tokens],
        }
        if self.notes:
            d["notes"] = self.notes
        return d

    def to_yaml(self) -> str:
        head = ("# livevowel speaker profile. The speaker id is a pseudonym; keep this file\n"
                "# with the speaker's other local data.\n")
        return head + yaml.safe_dump(self.to_dict(), sort_keys=False, allow_unicode=True)

    def save(self, path: "str | os.PathLike") -> Path:
        """Write the profile as YAML, atomically; returns the path."""
        path = Path(path)
        write_text_atomic(path, self.to_yaml())
        return path


def _check_speaker(value: Any, key: str, where: str = "") -> str:
    if not isinstance(value, str) or not _SPEAKER_RE.match(value):
        raise UserError(f"{where}{key}: {value!r} is not a usable speaker code "
                        "(letters, digits, '.', '_' or '-', up to 40 characters; use a pseudonym)")
    return value


_PROFILE_KEYS = {"format", "version", "speaker", "voice_group", "created", "updated", "method",
                 "transform", "tokens", "notes"}
_TRANSFORM_KEYS = {"method", "reference_set", "reference_group", "factors", "vowels", "tokens_used"}
_TOKEN_KEYS = {"vowel", "f1_hz", "f2_hz", "f3_hz", "f0_hz", "time"}


def load_profile(path: "str | os.PathLike") -> SpeakerProfile:
    """Read a profile written by :meth:`SpeakerProfile.save`.

    Raises
    ------
    UserError
        Naming the file and key when the file is missing or malformed.
    """
    path = Path(path)
    w = f"{path}: "
    try:
        data = yaml.safe_load(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise UserError(f"{w}cannot read profile ({exc.strerror}); check the path") from None
    except yaml.YAMLError:
        raise UserError(f"{w}not valid YAML; fix or recreate the profile") from None
    if not isinstance(data, Mapping) or data.get("format") != _FORMAT:
        raise UserError(f"{w}not a livevowel speaker profile (no 'format: {_FORMAT}' line)")
    for k in data:
        if k not in _PROFILE_KEYS:
            raise UserError(f"{w}key {k!r}: unknown key (known: {', '.join(sorted(_PROFILE_KEYS))})")
    for k in ("speaker", "voice_group", "created", "updated", "transform", "tokens"):
        if data.get(k) is None:
            raise UserError(f"{w}key {k!r}: missing value")
    if data.get("version", 1) != 1:
        raise UserError(f"{w}key 'version': {data['version']!r} is newer than this livevowel understands")
    _check_speaker(data["speaker"], "key 'speaker'", w)
    tr = data["transform"]
    if not isinstance(tr, Mapping):
        raise UserError(f"{w}key 'transform': expected key: value lines")
    for k in tr:
        if k not in _TRANSFORM_KEYS:
            raise UserError(f"{w}key 'transform.{k}': unknown key")
    try:
        fac = tr["factors"]
        factors = (float(fac["f1"]), float(fac["f2"]), float(fac["f3"]))
        if not all(0.3 < f < 3.0 for f in factors):
            raise ValueError
        transform = Transform(method=str(tr["method"]), factors=factors,
                              reference_set=str(tr["reference_set"]), reference_group=str(tr["reference_group"]),
                              vowels=tuple(str(v) for v in tr.get("vowels") or ()),
                              tokens_used=int(tr.get("tokens_used", 0)))
    except (KeyError, TypeError, ValueError):
        raise UserError(f"{w}key 'transform': needs method, reference_set, reference_group and "
                        "factors f1/f2/f3 (numbers between 0.3 and 3)") from None
    if transform.method not in METHODS[1:]:
        raise UserError(f"{w}key 'transform.method': {transform.method!r} is not one of {', '.join(METHODS[1:])}")
    toks = []
    if not isinstance(data["tokens"], list):
        raise UserError(f"{w}key 'tokens': expected a list of tokens")
    for i, t in enumerate(data["tokens"], start=1):
        if not isinstance(t, Mapping) or any(k not in _TOKEN_KEYS for k in t) or "vowel" not in t:
            raise UserError(f"{w}key 'tokens' #{i}: expected vowel, f1_hz, f2_hz and optionally f3_hz, f0_hz, time")
        try:
            toks.append(CalibrationToken(vowel=str(t["vowel"]), f1_hz=t.get("f1_hz"), f2_hz=t.get("f2_hz"),
                                         f3_hz=t.get("f3_hz"), f0_hz=t.get("f0_hz"),
                                         time=None if t.get("time") is None else str(t["time"])))
        except UserError as exc:
            raise UserError(f"{w}key 'tokens' #{i}: {exc}") from None
    method = str(data.get("method", "auto"))
    if method not in METHODS:
        raise UserError(f"{w}key 'method': {method!r} is not one of {', '.join(METHODS)}")
    try:
        return SpeakerProfile(speaker_id=data["speaker"], voice_group=str(data["voice_group"]),
                              created=str(data["created"]), updated=str(data["updated"]), tokens=tuple(toks),
                              transform=transform, method=method,
                              notes=None if data.get("notes") is None else str(data["notes"]))
    except UserError as exc:
        raise UserError(f"{w}{exc}") from None
