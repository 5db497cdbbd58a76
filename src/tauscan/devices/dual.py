"""Forward-mode automatic differentiation over numpy arrays, for the charge-based models.

A :class:`Dual` holds values ``v`` (shape (n,), one per device) and their partial derivatives
``d`` (shape (k, n)) with respect to k bias voltages.  Each operation applies the chain rule
exactly, so a model written once as plain formulas yields currents, charges and their
Jacobians together, without finite differences (the derivatives are exact to round-off).
Constants and per-device parameter arrays mix in freely.
"""

from __future__ import annotations

import numpy as np


class Dual:
    __slots__ = ("v", "d")
    __array_priority__ = 100.0  # ndarray op Dual -> Dual's reflected method

    def __init__(self, v: np.ndarray, d: np.ndarray) -> None:
        self.v = v
        self.d = d

    @classmethod
    def variables(cls, *values: np.ndarray) -> list["Dual"]:
        """One independent variable per argument (all of the same length)."""
        k = len(values)
        n = len(values[0])
        out = []
        for i, v in enumerate(values):
            d = np.zeros((k, n))
            d[i] = 1.0
            out.append(cls(np.asarray(v, float), d))
        return out

    # -- arithmetic ---------------------------------------------------------------------
    def __add__(self, o):
        if isinstance(o, Dual):
            return Dual(self.v + o.v, self.d + o.d)
        return Dual(self.v + o, self.d)

    __radd__ = __add__

    def __sub__(self, o):
        if isinstance(o, Dual):
            return Dual(self.v - o.v, self.d - o.d)
        return Dual(self.v - o, self.d)

    def __rsub__(self, o):
        return Dual(o - self.v, -self.d)

    def __neg__(self):
        return Dual(-self.v, -self.d)

    def __mul__(self, o):
        if isinstance(o, Dual):
            d = self.d * o.v
            d += o.d * self.v
            return Dual(self.v * o.v, d)
        return Dual(self.v * o, self.d * o)

    __rmul__ = __mul__

    def __truediv__(self, o):
        if isinstance(o, Dual):
            inv = 1.0 / o.v
            q = self.v * inv
            d = o.d * q
            np.subtract(self.d, d, out=d)
            d *= inv
            return Dual(q, d)
        inv = 1.0 / o
        return Dual(self.v * inv, self.d * inv)

    def __rtruediv__(self, o):
        inv = 1.0 / self.v
        q = o * inv
        return Dual(q, -self.d * (q * inv))

    def __pow__(self, p):
        """``self ** p`` for a constant (or per-device) exponent p."""
        vp = self.v ** p
        return Dual(vp, self.d * (p * vp / self.v))

    def __rpow__(self, base):
        """``base ** self`` for a positive constant base."""
        out = base ** self.v
        return Dual(out, self.d * (out * np.log(base)))

    # -- comparisons give plain boolean arrays (branch selection) -----------------------
    def __lt__(self, o):
        return self.v < (o.v if isinstance(o, Dual) else o)

    def __le__(self, o):
        return self.v <= (o.v if isinstance(o, Dual) else o)

    def __gt__(self, o):
        return self.v > (o.v if isinstance(o, Dual) else o)

    def __ge__(self, o):
        return self.v >= (o.v if isinstance(o, Dual) else o)

    def __getitem__(self, index):
        return Dual(self.v[index], self.d[:, index])

    def __len__(self) -> int:
        return len(self.v)


def const(value, like: Dual) -> Dual:
    """A constant (array or scalar) as a Dual shaped as ``like``."""
    v = np.broadcast_to(np.asarray(value, float), like.v.shape).copy()
    return Dual(v, np.zeros_like(like.d))


def _unary(x: Dual, f: np.ndarray, df: np.ndarray) -> Dual:
    return Dual(f, x.d * df)


def sqrt(x: Dual) -> Dual:
    r = np.sqrt(x.v)
    return _unary(x, r, 0.5 / r)


def exp(x: Dual) -> Dual:
    e = np.exp(x.v)
    return _unary(x, e, e)


def log(x: Dual) -> Dual:
    return _unary(x, np.log(x.v), 1.0 / x.v)


def where(cond: np.ndarray, a, b) -> Dual:
    """Per device: a where cond holds, else b (either may be a constant, or a function of no
    arguments that gives the branch: it is evaluated only when some device takes it)."""
    cond = np.asarray(cond)
    if cond.all():
        a = a() if callable(a) else a
        if isinstance(a, Dual):
            return a
    elif not cond.any():
        b = b() if callable(b) else b
        if isinstance(b, Dual):
            return b
    a = a() if callable(a) else a
    b = b() if callable(b) else b
    if not isinstance(a, Dual) and not isinstance(b, Dual):
        raise TypeError("where needs a Dual")
    like = a if isinstance(a, Dual) else b
    a = a if isinstance(a, Dual) else const(a, like)
    b = b if isinstance(b, Dual) else const(b, like)
    return Dual(np.where(cond, a.v, b.v), np.where(cond, a.d, b.d))
