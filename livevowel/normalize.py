"""Speaker normalisation of vowel formant tables.

A :class:`TokenTable` holds one row per vowel token: speaker, vowel label,
F1, F2 and optionally F3 and F0 (all in Hz, NaN where not measured). Each
method returns a :class:`Normalized` table with the same rows.

Methods
-------
:func:`lobanov`
    z-scores per speaker and formant (Lobanov 1971).
:func:`nearey`
    log-mean normalisation (Nearey 1978): ``shared=True`` subtracts one
    speaker constant, the mean of log F over all the formants used
    ("single log-mean"); ``shared=False`` subtracts the mean of each
    formant's logs separately ("individual log-mean").
:func:`watt_fabricius`
    S-centroid (Watt & Fabricius 2002): F / S, where S is the centroid of the
    speaker's triangle /i/, /a/, /u'/ with /u'/ at F1 = F2 = F1 of /i/.
    ``modified=True`` puts the /a/ corner's F2 midway between /i/ and /u'/
    (Fabricius, Watt & Johnson 2009).
:func:`bark_difference`
    Syrdal & Gopal (1986): Z3-Z1, Z3-Z2 and Z1-Z0 in Bark (Traunmüller 1990
    Bark scale, see :mod:`livevowel.dsp.scales`).

References
----------
Lobanov, B. M. (1971). Classification of Russian vowels spoken by different
speakers. J. Acoust. Soc. Am. 49, 606-608.
Nearey, T. M. (1978). Phonetic feature systems for vowels. Indiana
University Linguistics Club.
Watt, D., & Fabricius, A. (2002). Evaluation of a technique for improving
the mapping of multiple speakers' vowel spaces in the F1~F2 plane. Leeds
Working Papers in Linguistics and Phonetics 9, 159-173.
Fabricius, A., Watt, D., & Johnson, D. E. (2009). A comparison of three
speaker-intrinsic vowel formant frequency normalization algorithms for
sociophonetics. Language Variation and Change 21, 413-435.
Syrdal, A. K., & Gopal, H. S. (1986). A perceptual model of vowel
recognition based on the auditory representation of American English vowels.
J. Acoust. Soc. Am. 79, 1086-1100.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

from livevowel.dsp.scales import hz_to_bark

__all__ = ["TokenTable", "Normalized", "lobanov", "nearey", "watt_fabricius", "bark_difference", "METHODS"]

_FORMANTS = ("f1", "f2", "f3")


@dataclass(frozen=True, eq=False)
class TokenTable:
    """Vowel tokens, one row each.

    Attributes
    ----------
    speaker, vowel : ndarray of str, shape (n,)
    f1, f2 : ndarray of float, shape (n,)
        Formants in Hz.
    f3, f0 : ndarray of float or None
        Third formant and fundamental in Hz (NaN where not measured), or
        None when the table has no such column.
    """

    speaker: np.ndarray
    vowel: np.ndarray
    f1: np.ndarray
    f2: np.ndarray
    f3: np.ndarray | None = None
    f0: np.ndarray | None = None

    def __post_init__(self) -> None:
        n = len(np.atleast_1d(self.speaker))
        for name in ("speaker", "vowel"):
            arr = np.asarray(getattr(self, name)).astype(str)
            if arr.shape != (n,):
                raise ValueError(f"TokenTable.{name} has shape {arr.shape}, expected ({n},)")
            object.__setattr__(self, name, arr)
        for name in ("f1", "f2", "f3", "f0"):
            val = getattr(self, name)
            if val is None:
                if name in ("f1", "f2"):
                    raise ValueError(f"TokenTable.{name} is required")
                continue
            arr = np.asarray(val, dtype=np.float64)
            if arr.shape != (n,):
                raise ValueError(f"TokenTable.{name} has shape {arr.shape}, expected ({n},)")
            if np.any(arr <= 0):
                raise ValueError(f"TokenTable.{name}: frequencies must be positive Hz (use NaN for not measured)")
            object.__setattr__(self, name, arr)

    def __len__(self) -> int:
        return len(self.speaker)

    @classmethod
    def from_rows(cls, rows: Iterable[Mapping[str, Any]]) -> "TokenTable":
        """Build from mappings with keys speaker, vowel, f1, f2 and optionally f3, f0 (Hz).

        ``f1_hz``-style keys are accepted too.
        """
        rows = list(rows)
        cols: dict[str, list] = {k: [] for k in ("speaker", "vowel", "f1", "f2", "f3", "f0")}
        for i, r in enumerate(rows):
            for k in cols:
                v = r.get(k, r.get(f"{k}_hz"))
                if v is None and k in ("speaker", "vowel", "f1", "f2"):
                    raise ValueError(f"row {i}: missing {k}")
                cols[k].append(np.nan if v is None else v)
        opt = {k: (np.array(cols[k], dtype=float) if not all(np.isnan(np.array(cols[k], dtype=float))) else None)
               for k in ("f3", "f0")}
        return cls(speaker=np.array(cols["speaker"]), vowel=np.array(cols["vowel"]),
                   f1=np.array(cols["f1"], dtype=float), f2=np.array(cols["f2"], dtype=float), **opt)

    def speakers(self) -> tuple[str, ...]:
        """Speaker ids in order of first appearance."""
        _, first = np.unique(self.speaker, return_index=True)
        return tuple(self.speaker[np.sort(first)])

    def formants(self, names: Sequence[str] = ("f1", "f2")) -> np.ndarray:
        """``(n, len(names))`` array of the named formants in Hz."""
        out = []
        for name in names:
            col = getattr(self, name, None) if name in _FORMANTS or name == "f0" else None
            if col is None:
                raise ValueError(f"the table has no {name} column")
            out.append(col)
        return np.column_stack(out)

    def select(self, mask: np.ndarray) -> "TokenTable":
        """Rows where ``mask`` is true (boolean or index array)."""
        return TokenTable(
            speaker=self.speaker[mask], vowel=self.vowel[mask], f1=self.f1[mask], f2=self.f2[mask],
            f3=None if self.f3 is None else self.f3[mask], f0=None if self.f0 is None else self.f0[mask])


@dataclass(frozen=True, eq=False)
class Normalized:
    """Result of a normalisation: same rows as the input table.

    Attributes
    ----------
    method : str
    speaker, vowel : ndarray of str
    columns : tuple of str
        Names of the value columns, e.g. ``("f1", "f2")`` or
        ``("z3_z1", "z3_z2", "z1_z0")``.
    values : ndarray, shape (n, len(columns))
    units : str
        ``"z"`` (SD units), ``"ln"`` (natural-log difference), ``"ratio"``
        (F / S) or ``"Bark"``.
    params : dict
        Per-speaker constants used (e.g. means and SDs), by speaker id.
    """

    method: str
    speaker: np.ndarray
    vowel: np.ndarray
    columns: tuple[str, ...]
    values: np.ndarray
    units: str
    params: dict

    def column(self, name: str) -> np.ndarray:
        """One value column by name."""
        try:
            return self.values[:, self.columns.index(name)]
        except ValueError:
            raise KeyError(f"no column {name!r} (columns: {', '.join(self.columns)})") from None

    def vowel_means(self) -> dict[str, np.ndarray]:
        """Mean of each column per vowel label (NaN-aware), in first-appearance order."""
        _, first = np.unique(self.vowel, return_index=True)
        return {v: np.nanmean(self.values[self.vowel == v], axis=0) for v in self.vowel[np.sort(first)]}


def _check_formants(table: TokenTable, formants: Sequence[str]) -> tuple[str, ...]:
    names = tuple(formants)
    for n in names:
        if n not in _FORMANTS:
            raise ValueError(f"unknown formant {n!r}; use f1, f2 or f3")
        if getattr(table, n) is None:
            raise ValueError(f"the table has no {n} column")
    if not names:
        raise ValueError("give at least one formant")
    return names


def lobanov(table: TokenTable, *, formants: Sequence[str] = ("f1", "f2"), ddof: int = 1) -> Normalized:
    """Lobanov (1971) z-scores: (F - mean) / SD per speaker and formant.

    Parameters
    ----------
    table : TokenTable
        Formants in Hz. Each speaker needs at least two measured tokens.
    formants : sequence of str, keyword-only
        Which formants to normalise (default F1, F2).
    ddof : int, keyword-only
        Delta degrees of freedom of the SD (1: sample SD, the usual choice).

    Returns
    -------
    Normalized
        Values in SD units; ``params[speaker] = {"mean": ..., "sd": ...}`` in Hz.
    """
    names = _check_formants(table, formants)
    x = table.formants(names)
    out = np.full_like(x, np.nan)
    params = {}
    for s in table.speakers():
        m = table.speaker == s
        mean = np.nanmean(x[m], axis=0)
        counts = np.sum(~np.isnan(x[m]), axis=0)
        if np.any(counts <= ddof):
            raise ValueError(f"lobanov: speaker {s!r} needs more than {ddof} tokens per formant")
        sd = np.nanstd(x[m], axis=0, ddof=ddof)
        if np.any(sd == 0):
            raise ValueError(f"lobanov: speaker {s!r} has no spread in a formant (all tokens equal)")
        out[m] = (x[m] - mean) / sd
        params[s] = {"mean": mean, "sd": sd}
    return Normalized("lobanov", table.speaker, table.vowel, names, out, "z", params)


def nearey(table: TokenTable, *, formants: Sequence[str] = ("f1", "f2"), shared: bool = True) -> Normalized:
    """Nearey (1978) log-mean normalisation: ln F minus the speaker's log mean.

    Parameters
    ----------
    table : TokenTable
        Formants in Hz.
    formants : sequence of str, keyword-only
        Formants used (and, when ``shared``, pooled into the one constant).
    shared : bool, keyword-only
        True: one constant per speaker, the mean of ln F over every token and
        every formant used ("single log-mean"). False: one constant per
        formant ("individual log-mean").

    Returns
    -------
    Normalized
        Values in natural-log units (``exp`` of a value is a ratio to the
        speaker's geometric mean); ``params[speaker] = {"log_mean": ...}``.
    """
    names = _check_formants(table, formants)
    logs = np.log(table.formants(names))
    out = np.full_like(logs, np.nan)
    params = {}
    for s in table.speakers():
        m = table.speaker == s
        if shared:
            g = np.full(len(names), np.nanmean(logs[m]))
        else:
            g = np.nanmean(logs[m], axis=0)
        out[m] = logs[m] - g
        params[s] = {"log_mean": g}
    return Normalized("nearey-shared" if shared else "nearey-per-formant", table.speaker, table.vowel,
                      names, out, "ln", params)


def watt_fabricius(table: TokenTable, *, i_vowel: str = "i", a_vowel: str = "a",
                   modified: bool = False) -> Normalized:
    """Watt & Fabricius (2002) S-centroid normalisation of F1 and F2.

    For each speaker: the /i/ corner is the mean (F1, F2) of the tokens
    labelled ``i_vowel``, the /a/ corner the mean of ``a_vowel``, and /u'/ is
    (F1_i, F1_i). S(Fk) is the mean of the three corners' Fk; the result is
    F / S.

    Parameters
    ----------
    table : TokenTable
        F1, F2 in Hz; every speaker needs tokens of both corner vowels.
    i_vowel, a_vowel : str, keyword-only
        Labels of the high front and the low corner vowel (e.g. ``"ɑ"``).
    modified : bool, keyword-only
        Use F2 of /a/ = (F2_i + F2_u') / 2 (Fabricius, Watt & Johnson 2009).

    Returns
    -------
    Normalized
        Ratios F / S; ``params[speaker] = {"S": (S_F1, S_F2)}`` in Hz.
    """
    x = table.formants(("f1", "f2"))
    out = np.full_like(x, np.nan)
    params = {}
    for s in table.speakers():
        m = table.speaker == s
        corners = {}
        for label in (i_vowel, a_vowel):
            sel = m & (table.vowel == label)
            if not np.any(sel):
                raise ValueError(f"watt_fabricius: speaker {s!r} has no /{label}/ token")
            corners[label] = np.nanmean(x[sel], axis=0)
        i1, i2 = corners[i_vowel]
        a1, a2 = corners[a_vowel]
        u1 = u2 = i1
        if modified:
            a2 = (i2 + u2) / 2.0
        sc = np.array([(i1 + a1 + u1) / 3.0, (i2 + a2 + u2) / 3.0])
        out[m] = x[m] / sc
        params[s] = {"S": sc}
    return Normalized("watt-fabricius-modified" if modified else "watt-fabricius", table.speaker,
                      table.vowel, ("f1", "f2"), out, "ratio", params)


def bark_difference(table: TokenTable) -> Normalized:
    """Syrdal & Gopal (1986) Bark differences Z3-Z1, Z3-Z2 and Z1-Z0.

    Z is the Traunmüller (1990) Bark value of F0 (Z0) and the formants.
    Columns that need F3 or F0 are NaN where the table lacks them. Syrdal &
    Gopal read Z3-Z2 < 3 Bark as front and Z1-Z0 < 3 Bark as high.

    Returns
    -------
    Normalized
        Columns ``("z3_z1", "z3_z2", "z1_z0")`` in Bark.
    """
    n = len(table)
    nan = np.full(n, np.nan)
    z1 = hz_to_bark(table.f1)
    z2 = hz_to_bark(table.f2)
    z3 = hz_to_bark(table.f3) if table.f3 is not None else nan
    z0 = hz_to_bark(table.f0) if table.f0 is not None else nan
    vals = np.column_stack([z3 - z1, z3 - z2, z1 - z0])
    return Normalized("bark-difference", table.speaker, table.vowel, ("z3_z1", "z3_z2", "z1_z0"),
                      vals, "Bark", {})


#: method name -> function, for callers choosing by name.
METHODS = {
    "lobanov": lobanov,
    "nearey": nearey,
    "watt-fabricius": watt_fabricius,
    "bark-difference": bark_difference,
}
