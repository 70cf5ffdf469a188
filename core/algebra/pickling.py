"""Exact numbers and polynomials through ``pickle``, so a finished analysis can travel from a
worker process to the window unchanged.

python-flint's polynomial and ball types cannot be pickled by themselves; :func:`register` teaches
``pickle`` (through ``copyreg``) to write each as its exact parts: integer or rational coefficients,
a multivariate polynomial's variable names, ordering and terms, a ball's midpoint and radius as
dyadic numbers (mantissa, exponent). Coefficients and midpoints come back exactly; a radius may
come back rounded up by about 2^-29 of itself (flint's radius type), so an enclosure stays one.

>>> import pickle
>>> from flint import arb, fmpq, fmpq_mpoly_ctx, fmpq_poly
>>> register()
>>> ctx = fmpq_mpoly_ctx.get(("s", "K"), "lex")
>>> p = ctx.from_dict({(2, 0): fmpq(1, 3), (0, 1): 5})
>>> pickle.loads(pickle.dumps(p)) == p, pickle.loads(pickle.dumps(fmpq_poly([1, 2, 3]))) == fmpq_poly([1, 2, 3])
(True, True)
>>> x = arb(1) / 3
>>> y = pickle.loads(pickle.dumps(x))
>>> (y.mid() == x.mid(), x.rad() <= y.rad() <= x.rad() * (1 + 2 ** -28))
(True, True)
"""
from __future__ import annotations

import copyreg

from flint import (
    acb,
    acb_poly,
    arb,
    arb_poly,
    ctx,
    fmpq,
    fmpq_mpoly,
    fmpq_mpoly_ctx,
    fmpq_poly,
    fmpz,
    fmpz_mpoly,
    fmpz_mpoly_ctx,
    fmpz_poly,
)


def _dyadic(x) -> tuple[int, int]:
    """An exact arf (a ball's midpoint or radius) as (mantissa, exponent)."""
    if x == 0:
        return 0, 0
    man, exp = x.man_exp()
    return int(man), int(exp)


def make_arb(mid: tuple[int, int], rad: tuple[int, int]) -> arb:
    """The ball with exactly this midpoint and (up to a rounding up) this radius, each given as
    mantissa * 2^exponent."""
    bits = max(abs(mid[0]).bit_length(), 1) + 8
    with ctx.workprec(bits):
        centre = arb(fmpz(mid[0])) * arb(2) ** mid[1] if mid[0] else arb(0)
        radius = arb(fmpz(rad[0])) * arb(2) ** rad[1] if rad[0] else arb(0)
        return arb(centre.mid(), radius.mid())


def _reduce_arb(x: arb):
    return make_arb, (_dyadic(x.mid()), _dyadic(x.rad()))


def _reduce_acb(z: acb):
    return acb, (z.real, z.imag)


def make_mpoly(kind: str, names: tuple[str, ...], ordering: str, terms: dict):
    context = (fmpq_mpoly_ctx if kind == "q" else fmpz_mpoly_ctx).get(names, ordering)
    return context.from_dict(terms)


def _reduce_mpoly(kind: str):
    def reduce(p):
        context = p.context()
        return make_mpoly, (kind, tuple(context.names()), context.ordering().name, p.to_dict())
    return reduce


def _reduce_mpoly_ctx(kind: str):
    def reduce(context):
        return (fmpq_mpoly_ctx if kind == "q" else fmpz_mpoly_ctx).get, (tuple(context.names()),
                                                                          context.ordering().name)
    return reduce


def register() -> None:
    """Make every flint type an analysis holds picklable (idempotent)."""
    copyreg.pickle(fmpq_poly, lambda p: (fmpq_poly, ([fmpq(p[i]) for i in range(p.degree() + 1)],)))
    copyreg.pickle(fmpz_poly, lambda p: (fmpz_poly, (p.coeffs(),)))
    copyreg.pickle(arb, _reduce_arb)
    copyreg.pickle(acb, _reduce_acb)
    copyreg.pickle(arb_poly, lambda p: (arb_poly, ([p[i] for i in range(p.degree() + 1)],)))
    copyreg.pickle(acb_poly, lambda p: (acb_poly, ([p[i] for i in range(p.degree() + 1)],)))
    copyreg.pickle(fmpq_mpoly, _reduce_mpoly("q"))
    copyreg.pickle(fmpz_mpoly, _reduce_mpoly("z"))
    copyreg.pickle(fmpq_mpoly_ctx, _reduce_mpoly_ctx("q"))
    copyreg.pickle(fmpz_mpoly_ctx, _reduce_mpoly_ctx("z"))
