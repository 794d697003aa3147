"""Build-day logistics: spool cut plan (one-dimensional cutting stock) and bills of materials.

Pure core: lengths in metres, no file or clock access. Two parts:

* ``plan_spools``: assign every cut of the day to a spool or hank on hand. Objective, in order:
  (1) cut as much of the needed length as the stock allows, (2) open the fewest spools,
  (3) open the least total length (= least waste, since waste is the remainder of the spools
  opened). Method: first-fit and best-fit decreasing (Johnson, "Near-optimal bin packing
  algorithms", MIT thesis 1973; Coffman, Garey and Johnson, "Approximation algorithms for bin
  packing: a survey", 1996) followed by a load-shifting improvement step (empty the least-loaded
  spool by moves and swaps), and an exact branch-and-bound over set partitions when a material
  has at most ``EXACT_MAX_CUTS`` cuts (in the spirit of Martello and Toth, "Knapsack Problems",
  1990, ch. 8). Larger instances of build-day shape (few distinct lengths: every kit repeats
  its cuts) go to an integer program solved by scipy.optimize.milp (HiGHS): the number of cuts
  of each length on each spool, lexicographically least unassigned length, fewest spools,
  least length opened, with lengths rounded up (cuts) and down (spools) to the millimetre so any
  plan it finds is feasible. When the solver stops at its node limit the best plan so far is
  kept and the lower bound is printed beside it.
Bills of materials live in ``buildsheet.calc.bom``.
"""

from __future__ import annotations

import itertools
import math
import re
from collections import Counter, defaultdict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from buildsheet.errors import BuildError, Problem

#: Default cutting tolerance added to every cut, m (common practice: squaring the end and
#: measuring error; builders cut long anyway).
DEFAULT_TOLERANCE_M: float = 0.01
#: Materials with at most this many cuts get an exact search.
EXACT_MAX_CUTS: int = 10
#: Node budget of the exact search (keeps the worst case well under a second).
EXACT_NODE_BUDGET: int = 400_000
#: The integer program is used for at most this many distinct cut lengths x spools.
MILP_MAX_CELLS: int = 2000
#: Node limit of each integer-program solve (deterministic, unlike a time limit).
MILP_NODE_LIMIT: int = 200
#: Most swaps tried per spool the improvement step tries to empty.
_SWAP_ROUNDS: int = 50
#: Internal length quantum, m (micrometre integers avoid float ties in feasibility tests).
_QUANTUM_M: float = 1e-6


# --- data

@dataclass(frozen=True)
class Cut:
    """One piece to cut: ``length_m`` is the finished length, m (the tolerance is added)."""

    cut_id: str
    material: str
    length_m: float
    label: str


@dataclass(frozen=True)
class StockItem:
    """Spools or hanks on hand: ``count`` of them, each ``length_m`` long (m)."""

    material: str
    length_m: float
    count: int
    title: str


@dataclass(frozen=True)
class PlacedCut:
    """A cut on a spool: it runs from ``start_m`` to ``mark_m`` measured from the spool start.

    ``mark_m`` is the running "mark at" position, m; the piece is ``length_m + tolerance``.
    """

    cut: Cut
    start_m: float
    mark_m: float


@dataclass(frozen=True)
class SpoolUse:
    """One opened spool: its cuts in cutting order and what is left on it (m)."""

    spool_id: str
    material: str
    title: str
    length_m: float
    cuts: tuple[PlacedCut, ...]
    used_m: float
    remainder_m: float


@dataclass(frozen=True)
class ToBuy:
    """What to buy for one material: ``short_m`` of wire (the unassigned cuts with tolerance).

    ``spools`` whole spools of ``spool_length_m`` (the longest stocked size) hold the missing
    cuts; both are None when no stocked size is long enough (``note`` says why).
    """

    material: str
    short_m: float
    spool_length_m: float | None
    spools: int | None
    note: str


@dataclass(frozen=True)
class MaterialPlan:
    """Day totals for one material (m). ``lower_bound`` = fewest spools that could hold the
    needed length, ceil(needed / spool length) for one spool size."""

    material: str
    spools_on_hand: int
    spools_used: int
    lower_bound: int
    needed_m: float
    opened_m: float
    waste_m: float
    method: str  # "exact" (search or integer program completed), "heuristic", "integer
    # program" (stopped at its node limit), or "none" (nothing to pack)
    proven_optimal: bool  # exact search completed, or the plan meets the lower bound
    unassigned: tuple[Cut, ...]
    to_buy: ToBuy | None


@dataclass(frozen=True)
class SpoolPlan:
    """The day's cut plan. Every cut carries ``tolerance_m`` (m) on top of its length."""

    tolerance_m: float
    spools: tuple[SpoolUse, ...]
    materials: tuple[MaterialPlan, ...]

    @property
    def unassigned(self) -> tuple[Cut, ...]:
        """Cuts the stock on hand cannot supply."""
        return tuple(c for m in self.materials for c in m.unassigned)

    @property
    def to_buy(self) -> tuple[ToBuy, ...]:
        """One line per short material."""
        return tuple(m.to_buy for m in self.materials if m.to_buy is not None)

    @property
    def total_waste_m(self) -> float:
        """Sum of the remainders of all opened spools, m."""
        return math.fsum(m.waste_m for m in self.materials)


# --- helpers

def natural_key(text: str) -> tuple[tuple[int, int | str], ...]:
    """Sort key that orders "K2" before "K10"."""
    return tuple((0, int(p)) if p.isdigit() else (1, p) for p in re.split(r"(\d+)", text) if p)


def _q(length_m: float) -> int:
    """Length in integer micrometres."""
    return round(length_m / _QUANTUM_M)


def _match(loads: Sequence[int], caps: Sequence[int]) -> list[int] | None:
    """Give each load a distinct spool, least total capacity: largest load first takes the
    smallest spool that holds it (greedy is optimal for nested threshold constraints).
    Returns spool indices per load, or None if impossible."""
    free = sorted(range(len(caps)), key=lambda j: (caps[j], j))
    out = [-1] * len(loads)
    for i in sorted(range(len(loads)), key=lambda i: (-loads[i], i)):
        pick = next((k for k, j in enumerate(free) if caps[j] >= loads[i]), None)
        if pick is None:
            return None
        out[i] = free.pop(pick)
    return out


def lower_bound(needed_m: float, spool_lengths_m: Sequence[float]) -> int:
    """Fewest spools whose lengths could add up to ``needed_m`` (m), ignoring how cuts split.

    For one spool size L this is ceil(needed / L); with several sizes the longest are counted
    first, and if the stock is short, more spools of the longest size are assumed.
    """
    need = _q(needed_m)
    if need <= 0:
        return 0
    caps = sorted((_q(x) for x in spool_lengths_m), reverse=True)
    if not caps:
        return 0
    total = 0
    for k, c in enumerate(caps, start=1):
        total += c
        if total >= need:
            return k
    return len(caps) + -(-(need - total) // caps[0])


# --- packing core

@dataclass
class _Packing:
    bins: list[list[int]]  # item indices per bin
    spool: list[int]  # spool index per bin
    unassigned: list[int]


def _key(p: _Packing, needs: Sequence[int], caps: Sequence[int]) -> tuple[int, int, int]:
    """Objective: unassigned length, spools opened, length opened (smaller is better)."""
    return (sum(needs[i] for i in p.unassigned), len(p.bins), sum(caps[s] for s in p.spool))


def _greedy(needs: Sequence[int], caps: Sequence[int], fit: str, open_rule: str) -> _Packing:
    """First-fit or best-fit decreasing over opened spools; open a new spool when nothing fits
    (the longest unopened one, or the shortest that holds the cut)."""
    order = sorted(range(len(needs)), key=lambda i: (-needs[i], i))
    unopened = sorted(range(len(caps)), key=lambda j: (-caps[j], j))
    bins: list[list[int]] = []
    spool: list[int] = []
    free: list[int] = []
    unassigned: list[int] = []
    for i in order:
        n = needs[i]
        fits = [b for b, f in enumerate(free) if f >= n]
        choice = (fits[0] if fit == "first" else min(fits, key=lambda b: (free[b], b))) if fits else -1
        if choice < 0:
            fitting = [j for j in unopened if caps[j] >= n]
            if not fitting:
                unassigned.append(i)
                continue
            j = fitting[0] if open_rule == "longest" else fitting[-1]
            unopened.remove(j)
            bins.append([])
            spool.append(j)
            free.append(caps[j])
            choice = len(bins) - 1
        bins[choice].append(i)
        free[choice] -= n
    return _Packing(bins, spool, unassigned)


def _improve(p: _Packing, needs: Sequence[int], caps: Sequence[int]) -> _Packing:
    """Load shifting: try to empty the least-loaded spool by moving its cuts into the free
    space of the others (best fit); where a cut does not fit, swap it for a shorter cut from
    another spool that has room for the difference, which strictly lowers the target's load.
    Finally re-match groups to spools so the shortest spools that hold them are opened."""
    bins = [list(b) for b in p.bins]
    spool = list(p.spool)
    while len(bins) > 1:
        loads = [sum(needs[i] for i in b) for b in bins]
        t = min(range(len(bins)), key=lambda b: (loads[b], -b))
        free = [caps[spool[b]] - loads[b] for b in range(len(bins))]
        emptied = False
        for _ in range(_SWAP_ROUNDS):
            # Try to move every cut out of the target (tentatively).
            trial_free = list(free)
            moves: list[tuple[int, int]] = []
            for i in sorted(bins[t], key=lambda i: (-needs[i], i)):
                room = [b for b in range(len(bins)) if b != t and trial_free[b] >= needs[i]]
                if not room:
                    break
                best = min(room, key=lambda b: (trial_free[b], b))
                trial_free[best] -= needs[i]
                moves.append((i, best))
            if len(moves) == len(bins[t]):
                for i, b in moves:
                    bins[b].append(i)
                del bins[t]
                del spool[t]
                emptied = True
                break
            # Swap: cut x out of the target for a shorter y from b with room for x - y.
            swap = None
            gain = 0
            for x in bins[t]:
                for b in range(len(bins)):
                    if b == t:
                        continue
                    for y in bins[b]:
                        d = needs[x] - needs[y]
                        if 0 < d <= free[b] and d > gain:
                            swap, gain = (x, b, y), d
            if swap is None:
                break
            x, b, y = swap
            bins[t].remove(x)
            bins[t].append(y)
            bins[b].remove(y)
            bins[b].append(x)
            free[t] += gain
            free[b] -= gain
        if not emptied:
            break
    # Re-choose which spool carries each group of cuts: least total length opened.
    m = _match([sum(needs[i] for i in b) for b in bins], caps)
    return _Packing(bins, spool if m is None else m, list(p.unassigned))


class _Stop(Exception):
    """Ends the exact search (budget spent or a provably optimal plan found)."""


def _exact(needs: Sequence[int], caps: Sequence[int], incumbent: _Packing,
           budget: int = EXACT_NODE_BUDGET) -> tuple[_Packing, bool]:
    """Branch and bound over set partitions of the cuts (each cut, longest first, joins an
    earlier group, opens a new one, or, if stock is short, stays unassigned); groups are
    matched to spools by ``_match``. Objective as ``_key``. Returns (plan, proven optimal)."""
    n = len(needs)
    order = sorted(range(n), key=lambda i: (-needs[i], i))
    w = [needs[i] for i in order]
    suffix = [0] * (n + 1)
    for k in range(n - 1, -1, -1):
        suffix[k] = suffix[k + 1] + w[k]
    maxcap = max(caps)
    uniform = len(set(caps)) == 1
    best_key = list(_key(incumbent, needs, caps))
    best_groups: list[tuple[list[int], list[int]]] = []
    floor = lower_bound(suffix[0] * _QUANTUM_M, [c * _QUANTUM_M for c in caps])
    loads: list[int] = []
    member = [0] * n  # group per position in ``order``; -1 = unassigned
    nodes = 0

    def rec(k: int, lost: int) -> None:
        nonlocal nodes
        nodes += 1
        if nodes > budget:
            raise _Stop
        if lost > best_key[0]:
            return
        nb = len(loads)
        if lost == best_key[0]:  # the rest must all be placed: bound the spool count
            extra = max(0, suffix[k] - sum(maxcap - x for x in loads))
            if nb + -(-extra // maxcap) > best_key[1]:
                return
        if k == n:
            m = _match(loads, caps)
            if m is None:
                return
            key = [lost, nb, sum(caps[j] for j in m)]
            if key < best_key:
                best_key[:] = key
                best_groups[:] = [(list(member), m)]
                if lost == 0 and uniform and nb <= floor:
                    raise _Stop
            return
        tried: set[int] = set()
        for g in range(nb):
            if loads[g] + w[k] <= maxcap and loads[g] not in tried:
                tried.add(loads[g])
                loads[g] += w[k]
                member[k] = g
                rec(k + 1, lost)
                loads[g] -= w[k]
        if nb < len(caps) and w[k] <= maxcap:
            loads.append(w[k])
            member[k] = nb
            rec(k + 1, lost)
            loads.pop()
        member[k] = -1
        rec(k + 1, lost + w[k])

    proven = True
    try:
        rec(0, 0)
    except _Stop:
        proven = nodes <= budget
    if not best_groups:
        return incumbent, proven
    groups, m = best_groups[0]
    bins: list[list[int]] = [[] for _ in m]
    unassigned = []
    for k, g in enumerate(groups):
        if g < 0:
            unassigned.append(order[k])
        else:
            bins[g].append(order[k])
    return _Packing(bins, list(m), sorted(unassigned)), proven


def _milp(needs: Sequence[int], caps: Sequence[int]) -> tuple[_Packing, bool] | None:
    """Integer program over cut lengths (types) and spools, scipy.optimize.milp (HiGHS).

    z[t, j] = cuts of type t on spool j (integer), y[j] = spool j opened (binary), u[t] = cuts
    of type t left unassigned. Rows: sum_j z[t, j] + u[t] = n[t]; sum_t len[t] z[t, j] <=
    cap[j] y[j]; identical spools open in order (y[j] >= y[j+1]). Three solves, each fixing the
    optimum of the one before: unassigned length, spools opened, length opened. Lengths in mm
    (cuts rounded up, spools down). Returns (packing, proven optimal) or None if no plan.
    """
    import numpy as np
    from scipy.optimize import Bounds, LinearConstraint, milp

    types = sorted(set(needs), reverse=True)
    T, J = len(types), len(caps)
    if T * J > MILP_MAX_CELLS:
        return None
    count = [sum(1 for x in needs if x == t) for t in types]
    length = np.array([-(-t // 1000) for t in types], dtype=float)  # mm, rounded up
    cap = np.array([c // 1000 for c in caps], dtype=float)  # mm, rounded down
    nz, ny = T * J, J
    nvar = nz + ny + T
    rows: list[np.ndarray] = []
    lo: list[float] = []  # row bounds, mm or counts
    hi: list[float] = []
    for t in range(T):  # every cut placed or left over
        r = np.zeros(nvar)
        r[t * J:(t + 1) * J] = 1.0
        r[nz + ny + t] = 1.0
        rows.append(r)
        lo.append(count[t])
        hi.append(count[t])
    for j in range(J):  # spool capacity, only when opened
        r = np.zeros(nvar)
        r[j:nz:J] = length
        r[nz + j] = -cap[j]
        rows.append(r)
        lo.append(-np.inf)
        hi.append(0.0)
    order = sorted(range(J), key=lambda j: (caps[j], j))
    for a, b in itertools.pairwise(order):  # symmetry: identical spools open in order
        if caps[a] == caps[b]:
            r = np.zeros(nvar)
            r[nz + a], r[nz + b] = 1.0, -1.0
            rows.append(r)
            lo.append(0.0)
            hi.append(np.inf)
    ub = np.concatenate([np.repeat(np.array(count, float), J), np.ones(ny), np.array(count, float)])
    bounds = Bounds(np.zeros(nvar), ub)
    integrality = np.ones(nvar)
    c_lost = np.zeros(nvar)
    c_lost[nz + ny:] = length
    c_open = np.zeros(nvar)
    c_open[nz:nz + ny] = 1.0
    c_len = np.zeros(nvar)
    c_len[nz:nz + ny] = cap
    objectives = [c_lost, c_open, c_len] if len(set(caps)) > 1 else [c_lost, c_open]
    proven = True
    x = None
    for c in objectives:
        res = milp(c, constraints=LinearConstraint(np.array(rows), lo, hi),
                   integrality=integrality, bounds=bounds,
                   options={"node_limit": MILP_NODE_LIMIT, "presolve": True})
        if res.x is None:
            break
        x = np.round(res.x)
        proven = proven and res.status == 0
        best = float(c @ x)
        rows.append(c.copy())  # keep this optimum while improving the next objective
        lo.append(-np.inf)
        hi.append(best + 0.5)
    if x is None:
        return None
    z = x[:nz].reshape(T, J)
    pool = {t: sorted((i for i, v in enumerate(needs) if v == t)) for t in types}
    bins: list[list[int]] = []
    spool: list[int] = []
    for j in range(J):
        if x[nz + j] < 0.5 or z[:, j].sum() < 0.5:
            continue
        items = []
        for t_idx, t in enumerate(types):
            for _ in range(int(z[t_idx, j])):
                items.append(pool[t].pop(0))
        bins.append(items)
        spool.append(j)
    unassigned = sorted(i for t in types for i in pool[t])
    return _Packing(bins, spool, unassigned), proven


def _pack(needs: Sequence[int], caps: Sequence[int]) -> tuple[_Packing, str, bool]:
    """Best of the greedy variants after improvement; exact search for few cuts.
    Returns (packing, method, proven optimal)."""
    if not needs:
        return _Packing([], [], []), "none", True
    if not caps:
        return _Packing([], [], list(range(len(needs)))), "none", True
    candidates = []
    for fit in ("first", "best"):
        for rule in ("longest", "shortest"):
            p = _improve(_greedy(needs, caps, fit, rule), needs, caps)
            candidates.append(p)
    best = min(candidates, key=lambda p: _key(p, needs, caps))
    method = "heuristic"
    lb = lower_bound(sum(needs) * _QUANTUM_M, [c * _QUANTUM_M for c in caps])
    if not best.unassigned and len(set(caps)) == 1 and len(best.bins) <= lb:
        return best, method, True  # meets the lower bound
    proven = False
    if len(needs) <= EXACT_MAX_CUTS:
        best, proven = _exact(needs, caps, best, EXACT_NODE_BUDGET)
        method = "exact" if proven else "heuristic"
    else:
        found = _milp(needs, caps)
        if found is not None and _key(found[0], needs, caps) <= _key(best, needs, caps):
            best, proven = found
            method = "exact" if proven else "integer program"
        if not best.unassigned and len(set(caps)) == 1 and len(best.bins) <= lb:
            proven = True
    return best, method, proven


# --- public planner

def _check(cuts: Sequence[Cut], stock: Sequence[StockItem], tolerance_m: float) -> None:
    """Raise BuildError listing every bad cut, stock line or tolerance."""
    problems: list[Problem] = []
    if not (tolerance_m >= 0.0 and math.isfinite(tolerance_m)):
        problems.append(Problem("spool plan", f"cutting tolerance {tolerance_m!r} m: must be >= 0"))
    problems += [Problem(f"cut {i}", "duplicate cut ID")
                 for i, k in sorted(Counter(c.cut_id for c in cuts).items()) if k > 1]
    problems += [Problem(f"cut {c.cut_id}", f"length {c.length_m!r} m: must be > 0")
                 for c in cuts if not (c.length_m > 0.0 and math.isfinite(c.length_m))]
    problems += [Problem(f"stock {s.title}", f"length {s.length_m!r} m: must be > 0")
                 for s in stock if not (s.length_m > 0.0 and math.isfinite(s.length_m))]
    problems += [Problem(f"stock {s.title}", f"count {s.count}: must be >= 0")
                 for s in stock if s.count < 0]
    if problems:
        raise BuildError(problems)


def plan_spools(cuts: Iterable[Cut], stock: Iterable[StockItem], *,
                tolerance_m: float = DEFAULT_TOLERANCE_M) -> SpoolPlan:
    """Assign cuts to spools on hand, per material (lengths in m).

    Each cut occupies ``length_m + tolerance_m`` on its spool. Spools of one material may have
    different lengths (e.g. a part-used spool): the planner first minimises the number opened,
    then the total length opened, so a shorter spool is preferred whenever it holds the same
    cuts. Spools are numbered per material in the order the stock lists them
    ("<material>#1", ...). Cuts on a spool are listed in natural ID order with running marks.
    """
    cuts = tuple(cuts)
    stock = tuple(stock)
    _check(cuts, stock, tolerance_m)
    by_mat: dict[str, list[Cut]] = defaultdict(list)
    for c in cuts:
        by_mat[c.material].append(c)
    spools_by_mat: dict[str, list[tuple[str, str, float]]] = defaultdict(list)
    for s in stock:
        for _ in range(s.count):
            k = len(spools_by_mat[s.material]) + 1
            spools_by_mat[s.material].append((f"{s.material}#{k}", s.title, s.length_m))
    uses: list[SpoolUse] = []
    mats: list[MaterialPlan] = []
    for mat in sorted(set(by_mat) | set(spools_by_mat)):
        mcuts = sorted(by_mat.get(mat, []), key=lambda c: natural_key(c.cut_id))
        mspools = spools_by_mat.get(mat, [])
        needs = [_q(c.length_m + tolerance_m) for c in mcuts]
        caps = [_q(s[2]) for s in mspools]
        packing, method, proven = _pack(needs, caps)
        opened: list[SpoolUse] = []
        for b, j in sorted(zip(packing.bins, packing.spool), key=lambda bj: bj[1]):
            sid, title, length = mspools[j]
            pos = 0.0
            placed = []
            for i in sorted(b, key=lambda i: natural_key(mcuts[i].cut_id)):
                start = pos
                pos = start + mcuts[i].length_m + tolerance_m
                placed.append(PlacedCut(mcuts[i], start, pos))
            opened.append(SpoolUse(sid, mat, title, length, tuple(placed), pos, length - pos))
        uses.extend(opened)
        unassigned = tuple(mcuts[i] for i in sorted(packing.unassigned))
        needed = math.fsum(c.length_m + tolerance_m for c in mcuts)
        mats.append(MaterialPlan(
            material=mat, spools_on_hand=len(mspools), spools_used=len(opened),
            lower_bound=lower_bound(needed, [s[2] for s in mspools]),
            needed_m=needed, opened_m=math.fsum(u.length_m for u in opened),
            waste_m=math.fsum(u.remainder_m for u in opened), method=method,
            proven_optimal=proven,
            unassigned=unassigned,
            to_buy=_to_buy(mat, unassigned, tolerance_m, [s[2] for s in mspools])))
    return SpoolPlan(tolerance_m, tuple(uses), tuple(mats))


def _to_buy(material: str, unassigned: Sequence[Cut], tolerance_m: float,
            lengths: Sequence[float]) -> ToBuy | None:
    """Wire to buy for the cuts the stock cannot supply, in whole spools of the longest size."""
    if not unassigned:
        return None
    pieces = [c.length_m + tolerance_m for c in unassigned]
    short = math.fsum(pieces)
    if not lengths:
        return ToBuy(material, short, None, None, "none on hand: choose a spool size")
    size = max(lengths)
    if max(pieces) > size + _QUANTUM_M:
        return ToBuy(material, short, None, None,
                     f"a cut of {max(pieces):.2f} m is longer than any spool on hand")
    needs = [_q(x) for x in pieces]
    p = _greedy(needs, [_q(size)] * len(needs), "best", "longest")
    return ToBuy(material, short, size, len(p.bins), "")
