"""Long property run: exact Routh counts against numpy.roots on 10,000 random polynomials."""
from __future__ import annotations

import random

import pytest
from flint import fmpq

from tests.test_routh import build_from_roots, check_against_numpy


@pytest.mark.slow
def test_ten_thousand_random_polynomials():
    # reference: numpy.roots sign counts, roots kept at least 1/4 away from the imaginary axis
    rnd = random.Random(20240607)

    def away():
        return fmpq(rnd.randint(1, 16), 4) * rnd.choice([1, -1])

    for _ in range(10_000):
        reals = [away() for _ in range(rnd.randint(0, 5))]
        pairs = [(away(), fmpq(rnd.randint(1, 16), 4)) for _ in range(rnd.randint(0, 3))]
        check_against_numpy(build_from_roots(reals, pairs, rnd.choice([1, 2, -3])))
