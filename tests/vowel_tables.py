"""Published vowel tables used as outside references by the tests.

Peterson, G. E., & Barney, H. L. (1952). Control methods used in a study of
the vowels. J. Acoust. Soc. Am. 24, 175-184. Table II: average fundamental
and formant frequencies (Hz) of 10 American English vowels for 33 men,
28 women and 15 children. Values entered FROM MEMORY (they are among the most
reproduced numbers in phonetics; check against the printed table).
"""

import numpy as np

from livevowel.normalize import TokenTable

#: P&B vowel labels (IPA) in table order: heed hid head had hod hawed hood who'd hud heard.
PB_VOWELS = ("i", "ɪ", "ɛ", "æ", "ɑ", "ɔ", "ʊ", "u", "ʌ", "ɝ")

#: group -> formant -> 10 values (Hz), Peterson & Barney (1952) Table II, from memory.
PB1952 = {
    "men": {
        "f0": (136, 135, 130, 127, 124, 129, 137, 141, 130, 133),
        "f1": (270, 390, 530, 660, 730, 570, 440, 300, 640, 490),
        "f2": (2290, 1990, 1840, 1720, 1090, 840, 1020, 870, 1190, 1350),
        "f3": (3010, 2550, 2480, 2410, 2440, 2410, 2240, 2240, 2390, 1690),
    },
    "women": {
        "f0": (235, 232, 223, 210, 212, 216, 232, 231, 221, 218),
        "f1": (310, 430, 610, 860, 850, 590, 470, 370, 760, 500),
        "f2": (2790, 2480, 2330, 2050, 1220, 920, 1160, 950, 1400, 1640),
        "f3": (3310, 3070, 2990, 2850, 2810, 2710, 2680, 2670, 2780, 1960),
    },
    "children": {
        "f0": (272, 269, 260, 251, 256, 263, 276, 274, 261, 261),
        "f1": (370, 530, 690, 1010, 1030, 680, 560, 430, 850, 560),
        "f2": (3200, 2730, 2610, 2320, 1370, 1060, 1410, 1170, 1590, 1820),
        "f3": (3730, 3600, 3570, 3320, 3170, 3180, 3310, 3260, 3360, 2160),
    },
}


def pb_table(groups=("men", "women", "children")) -> TokenTable:
    """The P&B means as a token table, one 'speaker' per group."""
    rows = []
    for g in groups:
        for i, v in enumerate(PB_VOWELS):
            rows.append({"speaker": g, "vowel": v, **{k: PB1952[g][k][i] for k in ("f0", "f1", "f2", "f3")}})
    return TokenTable.from_rows(rows)


def pb_point(group: str, vowel: str) -> tuple[float, float, float]:
    """(F1, F2, F3) in Hz of one P&B mean."""
    i = PB_VOWELS.index(vowel)
    return tuple(float(PB1952[group][k][i]) for k in ("f1", "f2", "f3"))


def as_array(group: str) -> np.ndarray:
    """(10, 3) array of F1, F2, F3 for one P&B group."""
    return np.column_stack([PB1952[group][k] for k in ("f1", "f2", "f3")]).astype(float)
