"""Questions about tail p-values and test sizes, in the trade's words, computed on demand.

- "Is every tail of at least alpha within a relative tolerance here?": :func:`tail_verdict`
  (the tail relative error of :func:`atlas.tails.tail_error` against ``rel_tol``).
- "Does the test at level alpha keep its size below a limit?": :func:`size_verdict` (the size
  of :func:`atlas.sizes.test_size` against ``max_size``, by default alpha itself).
- The smallest n from which either holds: :func:`tail_min_n`, :func:`size_min_n`.
- The best method for either: :func:`best_tail_method`, :func:`best_size_method`.

Nothing here reads the cube: every number is computed exactly by :mod:`atlas.tails` and
:mod:`atlas.sizes` (a few milliseconds per (n, p) at n = 10^6).

Minimum n. Neither metric is monotone in n (the lattice makes the size of a test a sawtooth in
n), so "the minimum n" is the smallest N such that every integer n from N up to ``n_max``
passes, and N - 1 fails. Every integer n up to ``dense_to`` is evaluated; above it a ladder of
n about 5% apart says where to look, and every integer between is evaluated or covered by a
proven bound (:mod:`atlas.decision_search`, which holds the proofs). ``previous`` is N - 1;
``runs`` says where the n that pass are not one run from N upward.
"""

from dataclasses import dataclass

import numpy as np

from atlas.approximations import METHODS, check_method
from atlas.decision_search import DENSE_TO, N_MAX, MinN, min_ns, size_search, tail_search
from atlas.engine import check_n, check_p
from atlas.sizes import cell_sizes, check_alternative
from atlas.tails import cell_tail_errors, check_alpha, check_tail

__all__ = [
    "MinN",
    "SizeVerdict",
    "TailVerdict",
    "best_size_method",
    "best_tail_method",
    "size_min_n",
    "size_verdict",
    "tail_min_n",
    "tail_verdict",
]


_TAIL_WORDS = {
    "lower": "lower tail P(X <= k)",
    "upper": "upper tail P(X >= k)",
    "both": "tail, P(X <= k) or P(X >= k),",
}
_TEST_WORDS = {
    "less": "lower one-sided test (less)",
    "greater": "upper one-sided test (greater)",
    "two-sided": "two-sided test",
}


def _show(value):
    if isinstance(value, np.generic):
        value = value.item()
    return repr(value)


def _percent(x):
    """0.0579 as '5.79%'."""
    return f"{100.0 * x:.3g}%"


def _one(value, check, name, what):
    arr = check(value)
    if np.ndim(arr) != 0:
        raise ValueError(f"`{name}` must be a single {what} here; got shape {np.shape(arr)}.")
    return arr.item() if isinstance(arr, np.ndarray | np.generic) else arr


def check_rel_tol(rel_tol):
    """Return ``rel_tol`` as a float, or raise ValueError unless it is a positive finite number.

    Examples
    --------
    >>> check_rel_tol(-1)
    Traceback (most recent call last):
    ...
    ValueError: `rel_tol` must be a positive finite number; got -1.
    """
    if isinstance(rel_tol, bool) or not isinstance(rel_tol, int | float | np.number):
        raise ValueError(f"`rel_tol` must be a positive finite number; got {_show(rel_tol)}.")
    if not (np.isfinite(rel_tol) and rel_tol > 0):
        raise ValueError(f"`rel_tol` must be a positive finite number; got {_show(rel_tol)}.")
    return float(rel_tol)


def _point(n, p, p_name="p"):
    n = int(_one(n, check_n, "n", "integer"))
    try:
        p = float(_one(p, check_p, "p", "number"))
    except ValueError as error:
        raise ValueError(str(error).replace("`p`", f"`{p_name}`")) from None
    return n, p


def _alpha(alpha, name="alpha"):
    return float(_one(alpha, lambda a: check_alpha(a, name), name, "number"))


@dataclass(frozen=True)
class TailVerdict:
    """The answer to "is every tail of at least ``alpha`` within ``rel_tol`` here?".

    Attributes
    ----------
    within : bool
        ``error <= rel_tol``.
    error : float
        The tail relative error (:func:`atlas.tail_error`).
    rel_tol, alpha : float
        The relative tolerance and the smallest tail probability that counts.
    tail : str
        ``"lower"``, ``"upper"`` or ``"both"``.
    method : str
    n : int
    p : float
    """

    within: bool
    error: float
    rel_tol: float
    alpha: float
    tail: str
    method: str
    n: int
    p: float

    def explain(self):
        """One line for people.

        Examples
        --------
        >>> TailVerdict(False, 2.19, 0.1, 0.001, "lower", "normal_cc", 100, 0.1).explain()
        'Bin(n=100, p=0.1), normal_cc: every lower tail P(X <= k) of at least 0.001 within 10%? no: worst relative error 219%'
        """  # noqa: E501 - a doctest's output line cannot be wrapped
        return (
            f"Bin(n={self.n}, p={self.p!r}), {self.method}: every {_TAIL_WORDS[self.tail]} of at "
            f"least {self.alpha!r} within {_percent(self.rel_tol)}? "
            f"{'yes' if self.within else 'no'}: worst relative error {_percent(self.error)}"
        )


@dataclass(frozen=True)
class SizeVerdict:
    """The answer to "does the test at level ``alpha`` keep its size at most ``max_size``?".

    Attributes
    ----------
    keeps : bool
        ``size <= max_size``.
    size : float
        The probability under H0 that the test with the approximation's p-value rejects.
    exact_size : float
        The same for the exact test (at most ``alpha``).
    alpha, max_size : float
        The nominal level and the largest size accepted.
    alternative : str
        ``"two-sided"``, ``"less"`` or ``"greater"``.
    method : str
    n : int
    p0 : float
    """

    keeps: bool
    size: float
    exact_size: float
    alpha: float
    max_size: float
    alternative: str
    method: str
    n: int
    p0: float

    def explain(self):
        """One line for people.

        Examples
        --------
        >>> SizeVerdict(False, 0.0579, 0.0245, 0.05, 0.055, "greater", "normal_cc", 50,
        ...             0.1).explain()
        'Bin(n=50, p0=0.1), normal_cc p-values, upper one-sided test (greater) at nominal 5%: size 5.79% <= 5.5%? no; the exact test: 2.45%'
        """  # noqa: E501 - a doctest's output line cannot be wrapped
        return (
            f"Bin(n={self.n}, p0={self.p0!r}), {self.method} p-values, "
            f"{_TEST_WORDS[self.alternative]} at nominal {_percent(self.alpha)}: size "
            f"{_percent(self.size)} <= {_percent(self.max_size)}? "
            f"{'yes' if self.keeps else 'no'}; the exact test: {_percent(self.exact_size)}"
        )


def tail_verdict(n, p, alpha, rel_tol, *, method="normal_cc", tail="both"):
    """Is every tail probability of at least ``alpha`` approximated within ``rel_tol``?

    Parameters
    ----------
    n : int
        Number of trials, n >= 1.
    p : float
        Success probability, 0 < p < 1.
    alpha : float
        The smallest tail probability that counts, 0 < alpha < 1 (for a p-value: the
        significance level; for 3-sigma control limits: 0.00135).
    rel_tol : float
        The relative tolerance, > 0 (0.1 for "within 10%").
    method : str, optional
        One of :data:`atlas.METHODS`.
    tail : {"both", "lower", "upper"}, optional

    Returns
    -------
    TailVerdict

    Raises
    ------
    ValueError
        For an invalid argument; the message names it.

    Examples
    --------
    >>> tail_verdict(100, 0.1, 0.001, 0.1, tail="lower").within
    False
    """
    n, p = _point(n, p)
    alpha = _alpha(alpha)
    rel_tol = check_rel_tol(rel_tol)
    method, tail = check_method(method), check_tail(tail)
    error = _tail_value(n, p, alpha, method, tail)
    return TailVerdict(error <= rel_tol, error, rel_tol, alpha, tail, method, n, p)


def _tail_value(n, p, alpha, method, tail):
    lower, upper = cell_tail_errors(n, p, method, [alpha])
    return float({"lower": lower[0], "upper": upper[0]}.get(tail, max(lower[0], upper[0])))


def _max_size(max_size, alpha):
    if max_size is None:
        return alpha
    return _alpha(max_size, "max_size")


def size_verdict(n, p0, alpha, *, max_size=None, method="normal_cc", alternative="two-sided"):
    """Does the test of H0: p = p0 at level ``alpha`` keep its size at most ``max_size``?

    Parameters
    ----------
    n : int
        Number of trials, n >= 1.
    p0 : float
        The success probability under H0, 0 < p0 < 1.
    alpha : float
        The nominal level, 0 < alpha < 1.
    max_size : float, optional
        The largest acceptable size, 0 < max_size < 1; ``alpha`` by default (the test keeps its
        level).
    method : str, optional
        One of :data:`atlas.METHODS`: where the p-value comes from.
    alternative : {"two-sided", "less", "greater"}, optional

    Returns
    -------
    SizeVerdict

    Raises
    ------
    ValueError
        For an invalid argument; the message names it.

    Examples
    --------
    >>> v = size_verdict(50, 0.1, 0.05, max_size=0.055, alternative="greater")
    >>> v.keeps, round(v.size, 4)
    (False, 0.0579)
    """
    n, p0 = _point(n, p0, "p0")
    alpha = _alpha(alpha)
    max_size = _max_size(max_size, alpha)
    method, alternative = check_method(method), check_alternative(alternative)
    size, exact = cell_sizes(n, p0, method, [alpha], alternative)
    size, exact = float(size[0]), float(exact[0])
    return SizeVerdict(size <= max_size, size, exact, alpha, max_size, alternative, method, n, p0)


def _renamed_n(value, name):
    """check_n for another integer argument, its messages naming ``name``."""
    try:
        return check_n(value)
    except (ValueError, TypeError) as error:  # TypeError: a string, a boolean, a complex number
        raise type(error)(str(error).replace("`n`", f"`{name}`")) from None


def _search_options(n_max, dense_to):
    n_max = int(_one(n_max, lambda v: _renamed_n(v, "n_max"), "n_max", "integer"))
    dense_to = int(_one(dense_to, lambda v: _renamed_n(v, "dense_to"), "dense_to", "integer"))
    return n_max, dense_to


def tail_min_n(
    p, alpha, rel_tol, *, method="normal_cc", tail="both", n_max=N_MAX, dense_to=DENSE_TO
):
    """The smallest n from which every tail of at least ``alpha`` is within ``rel_tol``.

    Parameters
    ----------
    p, alpha, rel_tol, method, tail
        As for :func:`tail_verdict`.
    n_max : int, optional
        The largest n checked (default 10^5).
    dense_to : int, optional
        Every integer n up to here is evaluated (default 2048); above it, a ladder of n about
        5% apart says where to look and every integer between is evaluated or covered by a
        bound (:mod:`atlas.decision_search`).

    Returns
    -------
    MinN

    Examples
    --------
    >>> tail_min_n(0.5, 0.01, 0.1, n_max=200).n
    17
    """
    _, p = _point(1, p)
    alpha, rel_tol = _alpha(alpha), check_rel_tol(rel_tol)
    method, tail = check_method(method), check_tail(tail)
    n_max, dense_to = _search_options(n_max, dense_to)
    search = tail_search(p, alpha, method, tail)
    return min_ns(search, [rel_tol], n_max, dense_to, runs=True)[0]


def size_min_n(
    p0,
    alpha,
    *,
    max_size=None,
    method="normal_cc",
    alternative="two-sided",
    n_max=N_MAX,
    dense_to=DENSE_TO,
):
    """The smallest n from which the test at level ``alpha`` keeps its size <= ``max_size``.

    Parameters
    ----------
    p0, alpha, max_size, method, alternative
        As for :func:`size_verdict`.
    n_max, dense_to : int, optional
        As for :func:`tail_min_n`.

    Returns
    -------
    MinN

    Examples
    --------
    >>> size_min_n(0.1, 0.05, max_size=0.055, alternative="greater", n_max=500).n is not None
    True
    """
    _, p0 = _point(1, p0, "p0")
    alpha = _alpha(alpha)
    max_size = _max_size(max_size, alpha)
    method, alternative = check_method(method), check_alternative(alternative)

    n_max, dense_to = _search_options(n_max, dense_to)
    search = size_search(p0, alpha, method, alternative)
    return min_ns(search, [max_size], n_max, dense_to, runs=True)[0]


def _methods(methods):
    methods = tuple(check_method(m) for m in methods)
    if not methods:
        raise ValueError("`methods` must name at least one method; got none.")
    return methods


def best_tail_method(n, p, alpha, *, tail="both", methods=METHODS):
    """Methods ranked by their tail relative error at (n, p), best first.

    Returns
    -------
    list of (str, float)
        ``(method, error)`` pairs; ties keep the order of :data:`atlas.METHODS`.

    Examples
    --------
    >>> best_tail_method(100, 0.1, 0.001)[0][0]
    'peizer_pratt'
    """
    n, p = _point(n, p)
    alpha, tail = _alpha(alpha), check_tail(tail)
    errors = [(m, _tail_value(n, p, alpha, m, tail)) for m in _methods(methods)]
    return sorted(errors, key=lambda item: item[1])


def best_size_method(n, p0, alpha, *, alternative="two-sided", methods=METHODS):
    """Methods ranked by their test's size against the nominal level, best first.

    A test that keeps its level (size <= alpha) ranks above one that does not; among each, the
    size nearer alpha first (below alpha: the one giving away least of the level). The exact
    test's size is the same for every method and is returned beside each.

    Returns
    -------
    list of (str, float, float)
        ``(method, size, exact_size)`` triples; ties keep the order of :data:`atlas.METHODS`.

    Examples
    --------
    >>> best_size_method(50, 0.1, 0.05, alternative="greater")[0][0]
    'edgeworth_cc'
    """
    n, p0 = _point(n, p0, "p0")
    alpha, alternative = _alpha(alpha), check_alternative(alternative)
    rows = []
    for m in _methods(methods):
        size, exact = cell_sizes(n, p0, m, [alpha], alternative)
        rows.append((m, float(size[0]), float(exact[0])))
    return sorted(rows, key=lambda row: (row[1] > alpha, abs(row[1] - alpha)))
