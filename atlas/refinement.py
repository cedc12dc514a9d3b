"""Where to look between the checked p of a band: adaptive bisection in log-odds, in a budget.

A threshold that must hold for every p of a band [p_a, p_b] is the largest minimum n N(p) over
the band. Only finitely many p can be checked. :func:`refine` starts from the p already checked
in each band (its two ends and the points inside) and bisects, in log-odds, each pair of
neighbouring checked p (x_a, x_b) with minimum n N_a, N_b where a p between could decide the
band:

- **steep**: N_a and N_b differ by more than ``spread`` of the larger (and by more than 1): the
  minimum n changes fast there, and a lattice effect between them is not pinned by the ends;
- **near the top**: the larger of N_a, N_b is within ``spread`` of the band's largest N so far:
  a bump between them, however small, would raise the band's threshold.

Pairs are taken largest N first, at most ``per_round`` per band in a round, and all the new p
of a round are solved together (one call of ``solve``). A band stops when no pair qualifies,
when its pairs are ``depth`` bisections deep (log-odds width 2^-depth of the band's), or when
``budget`` new p have been added to it (:attr:`Refinement.exhausted` counts the bands that
stopped on the budget with a pair still qualifying). A pair with an end in ``fixed`` is never
bisected.

Every bisection records its **rise**: N at the new p over the larger N of its two neighbours,
minus 1; positive only where the minimum n between two checked p exceeds both. The largest rise
at the deepest level says how far an unchecked p between the final neighbours has been seen to
exceed them (:attr:`Refinement.rises`): :func:`atlas.guarantees.threshold_bands` takes its
safety margin from these figures measured over the default atlas. This is a search, not a
proof: the p between the final checked points are not computed.
"""

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["REFINE_BUDGET", "REFINE_DEPTH", "REFINE_PER_ROUND", "REFINE_SPREAD", "Refinement",
           "refine"]  # fmt: skip

REFINE_DEPTH = 3  # bisections of a band at most: neighbours 2^-3 of its log-odds width apart
REFINE_BUDGET = 4  # new p per band at most
REFINE_SPREAD = 0.02  # a share of N: steep neighbours, or neighbours near the band's top
REFINE_PER_ROUND = 2  # pairs bisected per band in one round


@dataclass(frozen=True)
class Refinement:
    """What :func:`refine` did.

    Attributes
    ----------
    points : tuple of dict
        Per band, log-odds -> minimum n (None: no answer) of every p checked, new ones too.
    added : numpy.ndarray of int64
        New p per band.
    rises : tuple of (int, float)
        For every new p: its depth (1 for the midpoint of a band) and its rise, N at it over
        the larger N of its two neighbours, minus 1.
    exhausted : int
        Bands that stopped on the budget with a pair still qualifying.
    rounds : int
        Rounds of ``solve``.
    depth, budget : int
    spread : float
    """

    points: tuple
    added: np.ndarray
    rises: tuple
    exhausted: int
    rounds: int
    depth: int
    budget: int
    spread: float

    def largest_rise(self, depth=None):
        """The largest rise at ``depth`` (every depth when None); None when none was made.

        Examples
        --------
        >>> r = refine([0.0], [1.0], [{0.0: 10, 1.0: 20}], lambda x: [20] * len(x), depth=2)
        >>> r.largest_rise(), r.largest_rise(1), r.largest_rise(2)
        (0.0, 0.0, 0.0)
        """
        got = [r for d, r in self.rises if depth is None or d == depth]
        return max(got) if got else None

    def deepest(self):
        """The deepest level reached (0 when nothing was added)."""
        return max((d for d, _ in self.rises), default=0)


def _depth(width, gap):
    """How many bisections of a band of log-odds ``width`` give neighbours ``gap`` apart."""
    return int(round(math.log2(width / gap)))


def refine(lo, hi, points, solve, *, depth=REFINE_DEPTH, budget=REFINE_BUDGET,
           spread=REFINE_SPREAD, per_round=REFINE_PER_ROUND, fixed=()):  # fmt: skip
    """Bisect the bands [lo[j], hi[j]] (log-odds) where a p between checked ones could decide.

    Parameters
    ----------
    lo, hi : sequence of float
        Each band's ends in log-odds, lo[j] < hi[j].
    points : sequence of dict
        Per band, log-odds -> minimum n (int, or None for no answer) of the p already checked,
        both ends included. A band with a None is not refined (its answer is None whatever
        lies between).
    solve : callable
        ``solve(x)`` for a 1-d float array of log-odds returns their minimum n (int or None),
        in order.
    depth : int, optional
        The deepest bisection: neighbours 2^-depth of the band's width apart at the closest.
    budget : int, optional
        New p per band at most.
    spread : float, optional
        The share of N that makes a pair steep, or near the band's top (module notes).
    per_round : int, optional
        Pairs bisected per band in a round.
    fixed : collection of float, optional
        Log-odds whose pairs are not bisected (:func:`atlas.guarantees.threshold_bands`: points
        answered at a smaller tolerance). Read at every round, so ``solve`` may add to a set.

    Returns
    -------
    Refinement

    Raises
    ------
    ValueError
        When a band has no end in ``points``, or for a negative depth, budget or spread.

    Examples
    --------
    A band whose minimum n jumps from 100 to 200 at log-odds 0.3: the steep pairs go first, then
    the pairs at the top, until the budget of 4 new p is spent with pairs still qualifying.

    >>> def solve(x):
    ...     return [100 if v < 0.3 else 200 for v in x]
    >>> r = refine([0.0], [1.0], [{0.0: 100, 0.5: 200, 1.0: 200}], solve, depth=4, budget=4)
    >>> sorted(r.points[0]), r.added.tolist(), r.largest_rise(), r.exhausted
    ([0.0, 0.25, 0.375, 0.5, 0.625, 0.75, 1.0], [4], 0.0, 1)
    """
    if min(depth, budget, per_round) < 0 or not spread >= 0:
        raise ValueError(
            "`depth`, `budget`, `per_round` and `spread` must be non-negative; got "
            f"{depth!r}, {budget!r}, {per_round!r}, {spread!r}."
        )
    known = [dict(d) for d in points]
    widths = [float(b) - float(a) for a, b in zip(lo, hi, strict=True)]
    for j, (a, b) in enumerate(zip(lo, hi, strict=True)):
        if float(a) not in known[j] or float(b) not in known[j]:
            raise ValueError(f"`points` must hold both ends of band {j}; got {sorted(known[j])}.")
    added = np.zeros(len(known), dtype=np.int64)
    rises, rounds = [], 0
    while True:
        new = []  # (band, x, depth of x, larger neighbour's N)
        waiting = set()  # bands with a qualifying pair left beyond the budget
        for j, values in enumerate(known):
            if widths[j] <= 0 or any(v is None for v in values.values()):
                continue
            xs = sorted(values)
            top = max(values.values())
            pairs = []
            for xa, xb in zip(xs[:-1], xs[1:], strict=True):
                level = _depth(widths[j], xb - xa) + 1
                if level > depth or xa in fixed or xb in fixed:
                    continue
                na, nb = values[xa], values[xb]
                larger = max(na, nb)
                steep = abs(na - nb) > max(1, spread * larger)
                near_top = larger >= (1 - spread) * top
                if steep or near_top:
                    pairs.append((-larger, -abs(na - nb), xa, xb, level))
            pairs.sort()
            room = budget - int(added[j])
            if len(pairs) > room:
                waiting.add(j)
            for _, _, xa, xb, level in pairs[: max(0, min(per_round, room))]:
                new.append((j, (xa + xb) / 2.0, level, max(known[j][xa], known[j][xb])))
        if not new:
            break
        rounds += 1
        got = solve(np.array([x for _, x, _, _ in new], dtype=np.float64))
        for (j, x, level, larger), n in zip(new, got, strict=True):
            known[j][x] = n
            added[j] += 1
            if n is not None and larger:
                rises.append((level, n / larger - 1.0))
    return Refinement(points=tuple(known), added=added, rises=tuple(rises),
                      exhausted=len(waiting), rounds=rounds, depth=int(depth),
                      budget=int(budget), spread=float(spread))  # fmt: skip
