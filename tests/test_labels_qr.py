"""QR symbols of the labels (buildsheet.calc.label_qr) against segno, a general-purpose QR
encoder on PyPI (segno 1.6, Lars Heuer), which follows ISO/IEC 18004:2015: its own data-mask
search (clause 7.8.3) must pick the same mask, and its finished symbols must match module
for module (format information of clause 7.9.1, version information of clause 7.10)."""

from __future__ import annotations

import random
import string

import numpy as np
import pytest
import segno

from buildsheet.calc.label_qr import (
    build_symbol,
    format_bits,
    function_modules,
    mask_patterns,
    penalties,
)


def _payloads(count: int, seed: int) -> list[tuple[str, str]]:
    rng = random.Random(seed)
    alphabet = string.ascii_letters + string.digits + " -./:%"
    out = []
    for _ in range(count):
        n = rng.choice((rng.randint(1, 60), rng.randint(60, 400)))
        out.append(("".join(rng.choice(alphabet) for _ in range(n)), rng.choice("lmqh")))
    return out


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_mask_choice_and_symbol_match_segno(seed):
    for payload, level in _payloads(80, seed):
        ref = segno.make_qr(payload, error=level, boost_error=False)  # segno's own mask search
        mine = build_symbol(payload, level)
        assert (mine.version, mine.mask, mine.error) == (ref.version, ref.mask, ref.error)
        assert [bytes(r) for r in mine.matrix] == [bytes(r) for r in ref.matrix], payload


def test_label_payloads_match_segno_at_every_version_used():
    for version in range(1, 11):
        for leg in ("K01-75m-A", "K100-160m-B", "K07-60m-us-A"):
            payload = f"http://buildsheet.local:8000/{leg}.html"[: 10 + 3 * version]
            for level in ("q", "h"):
                try:
                    ref = segno.make_qr(payload, error=level, version=version, boost_error=False)
                except segno.DataOverflowError:
                    continue
                mine = build_symbol(payload, level, version)
                assert mine.mask == ref.mask
                assert [bytes(r) for r in mine.matrix] == [bytes(r) for r in ref.matrix]


def test_format_bits_match_the_standard_table():
    # ISO/IEC 18004:2015 Annex C, Table C.1 (from memory): level M, mask 0 -> 101010000010010;
    # level L, mask 0 -> 111011111000100; level H, mask 7 -> 000100000111011.
    assert format_bits("m", 0) == 0b101010000010010
    assert format_bits("l", 0) == 0b111011111000100
    assert format_bits("h", 7) == 0b000100000111011


def test_function_modules_are_exactly_where_masks_differ_nowhere():
    # Two masks applied by segno differ only on data modules and in the format information.
    payload = "K03-40m-A 7.150 MHz " * 8
    for version in (1, 2, 7, 14):
        a, b = (np.array(segno.make_qr(payload[: 4 * version + 6], error="q", version=version,
                                        mask=m, boost_error=False).matrix) & 1 for m in (0, 5))
        n = len(a)
        data = ~function_modules(version)
        patterns = mask_patterns(n)
        assert np.array_equal((a ^ b)[data], (patterns[0] ^ patterns[5])[data])
        outside = (a ^ b) & ~data
        rows, cols = np.nonzero(outside)
        assert all(r == 8 or c == 8 for r, c in zip(rows, cols, strict=True))  # format only


def test_penalties_of_simple_patterns():
    # ISO/IEC 18004:2015 Table 11 worked by hand: an all-light 21 x 21 symbol has 21 rows
    # and 21 columns of one 21-module run (N1: 3 + 16 each), 20 x 20 2x2 blocks (N2: 3 each),
    # no 1:1:3:1:1 pattern, and 0 % dark (N4: 10 x 10).
    blank = np.zeros((1, 21, 21), dtype=np.uint8)
    assert penalties(blank)[0] == 42 * 19 + 400 * 3 + 100
    # A checkerboard: no runs, no blocks, no pattern, 221 of 441 dark (50.1 %: N4 = 0).
    i, j = np.mgrid[0:21, 0:21]
    board = ((i + j) % 2 == 0).astype(np.uint8)[None]
    assert penalties(board)[0] == 0
