"""How often ``voice="auto"`` picks the right speaker group: a confusion table.

Signals: steady vowels from the project synthesiser (:mod:`livevowel.dsp.synth`,
Klatt 1980 cascade, the group's own F4/F5) at the vowel means of Hillenbrand
et al. (1995), Table V (men, women, children; the shipped target sets
``gae-men``, ``gae-women``, ``gae-children``, entered from memory), at F0
values across each group's range and into the overlap: men 100-160 Hz, women
180-300 Hz, children 230-300 Hz (group mean F0 about 130 / 220 / 240-260 Hz
in Hillenbrand et al. 1995 and Peterson & Barney 1952, from memory). The
decision rule's own templates are Peterson & Barney (1952) means, so the
test tokens come from a different data set than the rule (but the rule's
spreads, voicegroup.LOG_SD, were chosen among a few nearby values on these
same tokens, so this is not an untouched test of them).

Run the full table with ``python -m livevowel.benchmarks.autovoice``
(``--quick`` for four vowels); ``livevowel bench --only dsp`` prints the
summary row.
"""

from __future__ import annotations

import sys
from typing import Callable


RATE_HZ = 16000

#: speaker group -> (synthesiser voice, target set with the vowel means, F0 values in Hz, expected engine voice)
GROUPS: dict[str, tuple[str, str, tuple[float, ...], str]] = {
    "men": ("man", "gae-men", (100.0, 130.0, 160.0), "adult_male"),
    "women": ("woman", "gae-women", (180.0, 220.0, 250.0, 275.0, 300.0), "adult_female"),
    "children": ("child", "gae-children", (230.0, 260.0, 300.0), "child"),
}

ENGINE_VOICES = ("adult_male", "adult_female", "child")
QUICK_VOWELS = ("i", "ɑ", "u", "æ")


def tokens(*, quick: bool):
    """Yield (group, f0_hz, vowel, signal) for every test token."""
    from livevowel.dsp.synth import synthesize_vowel
    from livevowel.targets import load_target_set

    seed = 500
    for group, (synth_voice, set_name, f0s, _) in GROUPS.items():
        ts = load_target_set(set_name)
        for t in ts.targets:
            if quick and t.ipa not in QUICK_VOWELS:
                continue
            for f0 in f0s:
                seed += 1
                x = synthesize_vowel(formants_hz=(t.f1_hz, t.f2_hz, t.f3_hz), f0_hz=f0, duration_s=0.8,
                                     rate_hz=RATE_HZ, voice=synth_voice, jitter_pct=0.5, shimmer_db=0.2,
                                     seed=seed, peak_dbfs=-12.0)
                yield group, f0, t.ipa, x


def confusion(*, quick: bool) -> dict:
    """Decided voice per token, offline and causal.

    Returns ``{"offline": table, "causal": table, "tokens": [...]}`` where
    ``table[group][engine_voice]`` counts tokens and each token row is
    ``(group, f0, vowel, offline_voice, causal_voice)``.
    """
    from livevowel.dsp.engine import AnalysisSettings, analyze

    s = AnalysisSettings(voice="auto")
    tables = {m: {g: {v: 0 for v in ENGINE_VOICES} for g in GROUPS} for m in ("offline", "causal")}
    rows = []
    for group, f0, vowel, x in tokens(quick=quick):
        off = analyze(x, RATE_HZ, settings=s).voice
        cau = analyze(x, RATE_HZ, settings=s, causal=True).voice
        tables["offline"][group][off] += 1
        tables["causal"][group][cau] += 1
        rows.append((group, f0, vowel, off, cau))
    return {"offline": tables["offline"], "causal": tables["causal"], "tokens": rows}


def correct_share(table: dict) -> float:
    """Share (0..1) of tokens whose decided voice is the group's own."""
    hit = sum(table[g][GROUPS[g][3]] for g in table)
    n = sum(sum(r.values()) for r in table.values())
    return hit / n if n else float("nan")


def print_tables(res: dict, out: Callable[[str], None]) -> None:
    for mode in ("offline", "causal"):
        tab = res[mode]
        out(f"  {mode:<9}{'':<11}" + "".join(f"{v:>14}" for v in ENGINE_VOICES) + f"{'correct':>10}")
        for g, row in tab.items():
            n = sum(row.values())
            ok = row[GROUPS[g][3]]
            out(f"  {'':<9}{g:<11}" + "".join(f"{row[v]:>14}" for v in ENGINE_VOICES) + f"{ok:>6}/{n:<3}")
        out(f"  {'':<9}{'all':<11}{'':>42}{100 * correct_share(tab):>9.1f}%")


def by_f0(res: dict, out: Callable[[str], None]) -> None:
    """Correct decisions per group and F0 (offline / causal)."""
    cells: dict = {}
    for group, f0, _, off, cau in res["tokens"]:
        c = cells.setdefault((group, f0), [0, 0, 0])
        want = GROUPS[group][3]
        c[0] += off == want
        c[1] += cau == want
        c[2] += 1
    out(f"  {'group':<10}{'F0 Hz':>6}{'offline':>10}{'causal':>10}")
    for (g, f0), (a, b, n) in cells.items():
        out(f"  {g:<10}{f0:>6.0f}{a:>6}/{n:<3}{b:>6}/{n:<3}")


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    quick = "--quick" in argv
    res = confusion(quick=quick)
    print("voice=auto confusion (rows: true group, columns: decided voice); Klatt vowels at Hillenbrand et al. "
          "(1995) means")
    print_tables(res, print)
    print()
    by_f0(res, print)
    if "--tokens" in argv:
        for r in res["tokens"]:
            print("  ", *r)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
