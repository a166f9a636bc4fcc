"""Causes of disagreements: injected slips of each kind are named as that kind."""

from __future__ import annotations

import random

import numpy as np
import pandas as pd

from core.causes import NEIGHBOURS, are_neighbours, classify, field_shift_cells
from core.codebook import Codebook, Variable
from core.compare import compare_passes
from core.passdata import PassData

# Keyboard geometry drawn here independently of core.causes, from the standard
# layouts (ISO/IEC 9995 numeric section and the top row of a QWERTY keyboard):
# (row, column) of each key's centre in key widths; the 0 key is two wide.
KEYPAD = {"7": (0, 0), "8": (0, 1), "9": (0, 2), "4": (1, 0), "5": (1, 1), "6": (1, 2),
          "1": (2, 0), "2": (2, 1), "3": (2, 2), "0": (3, 0.5), ".": (3, 2)}
TOP_ROW = "1234567890-"


def touching(a: str, b: str) -> bool:
    if a in KEYPAD and b in KEYPAD:
        (r1, c1), (r2, c2) = KEYPAD[a], KEYPAD[b]
        if (r1 == r2 and abs(c1 - c2) in (1, 1.5)) or (abs(r1 - r2) == 1 and abs(c1 - c2) <= 0.5):
            return True
    if a in TOP_ROW and b in TOP_ROW:
        return abs(TOP_ROW.index(a) - TOP_ROW.index(b)) == 1
    return False


def test_neighbour_table_matches_the_keyboard_geometry():
    keys = sorted(set(KEYPAD) | set(TOP_ROW))
    for a in keys:
        for b in keys:
            if a != b:
                assert are_neighbours(a, b) == touching(a, b), (a, b)
    assert frozenset(("5", "8")) in NEIGHBOURS and frozenset(("1", "3")) not in NEIGHBOURS


def slip(kind: str, rng: random.Random) -> tuple[str, str, bool] | None:
    """A paper value and the same value with one slip of ``kind``; None when not unambiguous."""
    digits = "".join(rng.choice("123456789") for _ in range(rng.randint(2, 5)))
    if kind == "transposed":
        i = rng.randrange(len(digits) - 1)
        if digits[i] == digits[i + 1]:
            return None
        return digits, digits[:i] + digits[i + 1] + digits[i] + digits[i + 2:], True
    if kind == "neighbour_key":
        i = rng.randrange(len(digits))
        options = [k for k in "0123456789" if touching(digits[i], k)]
        return digits, digits[:i] + rng.choice(options) + digits[i + 1:], True
    if kind == "dropped_char":
        i = rng.randrange(len(digits))
        if (i > 0 and digits[i - 1] == digits[i]) or (i + 1 < len(digits) and digits[i + 1] == digits[i]):
            return None  # dropping one of a doubled pair reads as doubling
        return digits, digits[:i] + digits[i + 1:], True
    if kind == "extra_char":
        i = rng.randrange(len(digits))
        return digits, digits[:i + 1] + digits[i] + digits[i + 1:], True
    if kind == "decimal_shift":
        whole = f"{digits}.{rng.choice('123456789')}"
        point = whole.index(".")
        shifted = whole.replace(".", "")
        shifted = shifted[:point + 1] + "." + shifted[point + 1:] if rng.random() < 0.5 else shifted
        return whole, shifted.rstrip("."), True
    if kind == "sign":
        return digits, "-" + digits, True
    if kind == "case_space":
        word = rng.choice(["Seed swap", "more shade", "Tool shed"])
        return word, rng.choice([word.lower(), word.upper(), word.replace(" ", "  "), " " + word]), False
    if kind == "omitted":
        return digits, "", True
    raise ValueError(kind)


def test_injected_slips_are_classified_as_their_cause_at_least_95_percent():
    rng = random.Random(11)
    kinds = ["transposed", "neighbour_key", "dropped_char", "extra_char", "decimal_shift", "sign",
             "case_space", "omitted"]
    for kind in kinds:
        cases = [c for c in (slip(kind, rng) for _ in range(400)) if c is not None]
        paper = pd.Series([c[0] for c in cases])
        keyed = pd.Series([c[1] for c in cases])
        numeric = pd.Series([c[2] for c in cases])
        has1 = paper != ""
        has2 = keyed != ""
        got = classify(paper, keyed, has1, has2, ~has1, ~has2, numeric)
        share = (got == kind).mean()
        # 95 % is the bar for unambiguous slips.
        assert share >= 0.95, (kind, share, got[got != kind].head().tolist())
        # Which pass holds the slip never matters.
        back = classify(keyed, paper, has2, has1, ~has2, ~has1, numeric)
        assert (back == got).all(), kind


def test_field_shift_runs_and_their_blank_end_in_both_directions():
    paper = np.array([["1", "2", "3", "6", "4", "2", "5", "1"]], dtype=object)
    skipped = np.array([["1", "3", "6", "4", "2", "", "5", "1"]], dtype=object)
    cells = field_shift_cells(paper, skipped, paper != skipped, paper == "", skipped == "")
    assert cells[0].tolist() == [False, True, True, True, True, True, False, False]
    back = field_shift_cells(skipped, paper, paper != skipped, skipped == "", paper == "")
    assert (back == cells).all()
    doubled = np.array([["1", "2", "2", "3", "6", "4", "5", "1"]], dtype=object)
    cells = field_shift_cells(paper, doubled, paper != doubled, paper == "", doubled == "")
    assert cells[0].tolist() == [False, False, True, True, True, True, False, False]
    # Two disagreements that merely look shifted are not a run of three.
    lone = np.array([["2", "2", "3", "6", "4", "2", "5", "1"]], dtype=object)
    assert not field_shift_cells(paper, lone, paper != lone, paper == "", lone == "").any()


def test_injected_field_shifts_are_found_through_the_engine():
    rng = np.random.default_rng(5)
    names = ["pid"] + [f"q{j}" for j in range(12)]
    cb = Codebook((Variable("pid", "integer", is_id=True),)
                  + tuple(Variable(n, "integer", min=1, max=9) for n in names[1:]))
    rows1, rows2, runs = [], [], []
    for i in range(1, 201):
        row = [str(i)] + [str(v) for v in rng.integers(1, 10, 12)]
        start = int(rng.integers(1, 7))
        length = int(rng.integers(3, 6))
        if len(set(row[start:start + length + 1])) < length + 1:
            continue  # repeated neighbours make the run ambiguous
        shifted = row[:start] + row[start + 1:start + length + 1] + [""] + row[start + length + 1:]
        rows1.append(row)
        rows2.append(shifted)
        runs.append((str(i), {names[j] for j in range(start, start + length + 1)}))
    p1 = PassData.from_texts(1, pd.DataFrame(rows1, columns=names))
    p2 = PassData.from_texts(2, pd.DataFrame(rows2, columns=names))
    table = compare_passes(cb, p1, p2)
    right = 0
    for pid, cols in runs:
        hit = table[table["participant"] == pid]
        right += set(hit.loc[hit["cause"] == "field_shift", "variable"]) == cols
    assert right / len(runs) >= 0.95
