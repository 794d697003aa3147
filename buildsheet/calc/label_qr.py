"""QR symbols for winder labels: one encoding, a fast data-mask choice (pure core, numpy).

segno encodes the payload once with a fixed data mask (it then skips its own mask search,
which is pure Python and costs several milliseconds a symbol). The data modules are unmasked,
the eight masked candidates are stacked in one numpy array and scored together with the
penalty rules N1-N4 of ISO/IEC 18004:2015 clause 7.8.3 (Table 11), and the lowest-scoring
mask is kept (the first of equals), as the standard asks. Format information (clause 7.9.1,
BCH (15,5) code, Annex C) is then written for the chosen mask. Scoring follows segno's reading
of Table 11 (format and version areas left light while scoring), so the choice agrees with
segno's own mask search; tests/test_labels_qr.py checks that on many payloads.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import segno
from segno import consts

#: Penalty weights N1-N4 (ISO/IEC 18004:2015 clause 7.8.3.1, Table 11).
N1, N2, N3, N4 = 3, 3, 40, 10
#: Mask applied to the BCH-coded format information (ISO/IEC 18004:2015 clause 7.9.1).
FORMAT_MASK: int = 0b101010000010010
#: Generator polynomial of the format information's BCH (15,5) code (ISO/IEC 18004 Annex C).
FORMAT_GENERATOR: int = 0b10100110111
#: Error correction level indicators in the format information (ISO/IEC 18004 Table 12).
EC_INDICATOR: dict[str, int] = {"l": 0b01, "m": 0b00, "q": 0b11, "h": 0b10}
#: The 1:1:3:1:1 finder-like pattern that N3 penalises (dark = 1).
_N3_CODE: int = 0b1011101


@dataclass(frozen=True)
class Symbol:
    """A finished QR symbol: dark modules as rows of 0/1 bytes (row 0 at the top)."""

    matrix: tuple[bytearray, ...]
    version: int
    error: str  # "H", "Q", ...
    mask: int


def symbol_size(version: int) -> int:
    """Side of a QR symbol in modules (ISO/IEC 18004 clause 6.3.1): 17 + 4 * version."""
    return 17 + 4 * version


def function_modules(version: int) -> np.ndarray:
    """Boolean n x n map of every module that is not data: finder patterns with separators,
    timing patterns, alignment patterns, format and version areas and the dark module
    (ISO/IEC 18004:2015 clauses 6.3.2-6.3.6, 7.9, 7.10)."""
    n = symbol_size(version)
    f = np.zeros((n, n), dtype=bool)
    f[:9, :9] = True  # finder + separator + format area, top left
    f[:9, n - 8:] = True  # top right
    f[n - 8:, :9] = True  # bottom left (with the dark module)
    f[6, :] = True  # timing patterns
    f[:, 6] = True
    centres = consts.ALIGNMENT_POS[version - 2] if version > 1 else ()  # from version 2
    for r in centres:
        for c in centres:
            if (r < 9 and (c < 9 or c > n - 9)) or (r > n - 9 and c < 9):
                continue  # no alignment pattern where a finder pattern is
            f[r - 2:r + 3, c - 2:c + 3] = True
    if version >= 7:
        f[:6, n - 11:n - 8] = True  # version information
        f[n - 11:n - 8, :6] = True
    return f


def mask_patterns(n: int) -> np.ndarray:
    """The eight data mask patterns as an (8, n, n) 0/1 array; i = row, j = column
    (ISO/IEC 18004:2015 clause 7.8.2, Table 10)."""
    i, j = np.mgrid[0:n, 0:n]
    conditions = (
        (i + j) % 2 == 0,
        i % 2 == 0,
        j % 3 == 0,
        (i + j) % 3 == 0,
        (i // 2 + j // 3) % 2 == 0,
        (i * j) % 2 + (i * j) % 3 == 0,
        ((i * j) % 2 + (i * j) % 3) % 2 == 0,
        ((i + j) % 2 + (i * j) % 3) % 2 == 0,
    )
    return np.stack(conditions).astype(np.uint8)


def format_bits(error: str, mask: int) -> int:
    """The 15-bit format information for level ``error`` and data mask ``mask``: 5 data bits,
    10 BCH check bits, XOR FORMAT_MASK (ISO/IEC 18004:2015 clause 7.9.1 and Annex C)."""
    data = EC_INDICATOR[error.lower()] << 3 | mask
    rem = data << 10
    for shift in range(4, -1, -1):
        if rem & (1 << (shift + 10)):
            rem ^= FORMAT_GENERATOR << shift
    return ((data << 10) | rem) ^ FORMAT_MASK


def format_cells(n: int) -> tuple[list[tuple[int, int]], list[tuple[int, int]]]:
    """(row, column) of format bits 0..14 in the copy around the top-left finder and in the
    copy split between the other two finders (ISO/IEC 18004:2015 clause 7.9.1, Figure 25);
    bit 14 is the most significant."""
    first = [(r, 8) for r in (0, 1, 2, 3, 4, 5, 7, 8)] + [(8, c) for c in (7, 5, 4, 3, 2, 1, 0)]
    second = [(8, n - 1 - k) for k in range(8)] + [(n - 7 + k, 8) for k in range(7)]
    return first, second


def penalties(stack: np.ndarray) -> np.ndarray:
    """Penalty score N1 + N2 + N3 + N4 of each symbol in an (m, n, n) 0/1 stack
    (ISO/IEC 18004:2015 clause 7.8.3.1, Table 11)."""
    m, n, _ = stack.shape
    lines = np.concatenate([stack, stack.transpose(0, 2, 1)], axis=1)  # (m, 2n, n)
    # N1: every run of 5 + i modules of one colour in a row or column scores 3 + i.
    sep = np.full((m, 2 * n, 1), 2, dtype=np.uint8)  # breaks runs between lines
    flat = np.concatenate([lines, sep], axis=2).reshape(-1)
    starts = np.flatnonzero(np.diff(flat, prepend=255) != 0)
    runs = np.diff(starts, append=flat.size)
    long = runs >= 5
    owner = starts[long] // (2 * n * (n + 1))
    n1 = np.bincount(owner, weights=runs[long] - 5 + N1, minlength=m)
    # N2: every 2 x 2 block of one colour scores 3.
    a = stack[:, :-1, :-1]
    same = (a == stack[:, 1:, :-1]) & (a == stack[:, :-1, 1:]) & (a == stack[:, 1:, 1:])
    n2 = N2 * same.sum(axis=(1, 2))
    # N3: 1:1:3:1:1 with four light modules (or the symbol's edge) before or after it.
    n3 = N3 * _n3_counts(lines)
    # N4: 10 for every 5 % the dark share departs from 50 %.
    dark = stack.sum(axis=(1, 2))
    n4 = np.array([N4 * int(abs(float(d) / (n * n) * 100 - 50) / 5) for d in dark])
    return n1 + n2 + n3 + n4


def _n3_counts(lines: np.ndarray) -> np.ndarray:
    """Number of N3 patterns in the rows and columns of each symbol, ``lines`` (m, 2n, n).

    A pattern counts when four light modules (or the symbol's edge) precede or follow it; the
    scan of a line resumes after a pattern counted (segno's reading of Table 11)."""
    m, count, n = lines.shape
    code = np.zeros((m, count, n - 6), dtype=np.uint8)  # the 7 modules from each as bits
    for k in range(7):
        code = code << 1 | lines[:, :, k:n - 6 + k]
    sym, line, idx = np.nonzero(code == _N3_CODE)
    dark = np.zeros((m, count, n + 1), dtype=np.int32)
    np.cumsum(lines, axis=2, out=dark[:, :, 1:])
    before = dark[sym, line, idx] - dark[sym, line, np.maximum(idx - 4, 0)]
    after = dark[sym, line, np.minimum(idx + 11, n)] - dark[sym, line, idx + 7]
    counted = (idx == 0) | (idx == n - 7) | (before == 0) | (after == 0)
    close = (sym[1:] == sym[:-1]) & (line[1:] == line[:-1]) & (idx[1:] - idx[:-1] < 7)
    if close.any():  # overlapping patterns (rare): follow the scan in order
        keep, last, resume = [], (-1, -1), 0
        for s_, l_, i_, c_ in zip(sym.tolist(), line.tolist(), idx.tolist(), counted.tolist(),
                                  strict=True):
            if (s_, l_) != last:
                last, resume = (s_, l_), 0
            seen = i_ >= resume
            keep.append(seen and c_)
            if seen:
                resume = i_ + (7 if c_ else 4)
        counted = np.array(keep, dtype=bool)
    return np.bincount(sym[counted], minlength=m)


def build_symbol(content: str, error: str, version: int | None = None) -> Symbol:
    """The QR symbol (never Micro QR) of ``content`` at level ``error`` exactly, at ``version``
    or the smallest that holds it; the data mask with the lowest penalty. Raises
    segno.DataOverflowError when the content does not fit."""
    fixed = segno.make_qr(content, error=error, version=version, mask=0, boost_error=False)
    v, n = int(fixed.version), len(fixed.matrix)
    base = np.array(fixed.matrix, dtype=np.uint8) & 1
    data = ~function_modules(v)
    patterns = mask_patterns(n) & data
    unmasked = base ^ patterns[0]
    first, second = format_cells(n)
    reserved = np.zeros((n, n), dtype=bool)
    for r, c in first + second:
        reserved[r, c] = True
    reserved[n - 8, 8] = True  # the dark module
    if v >= 7:
        reserved[:6, n - 11:n - 8] = True
        reserved[n - 11:n - 8, :6] = True
    candidates = (unmasked ^ patterns) * ~reserved  # format and version areas light
    best = int(np.argmin(penalties(candidates)))
    final = np.where(data, unmasked ^ patterns[best], base)
    bits = format_bits(fixed.error, best)
    for k, (r, c) in enumerate(first):
        final[r, c] = bits >> k & 1
    for k, (r, c) in enumerate(second):
        final[r, c] = bits >> k & 1
    final[n - 8, 8] = 1
    return Symbol(tuple(bytearray(row.tobytes()) for row in final.astype(np.uint8)), v,
                  fixed.error.upper(), best)
