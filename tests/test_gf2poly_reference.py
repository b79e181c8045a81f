"""The key-schedule job's own GF(2) polynomial factorisation (kept for speed at degrees
in the thousands, where galois takes seconds to minutes) agrees with galois."""

import numpy as np

from gfla.jobs.keysched import gf2poly


def test_factorisation_matches_galois_on_random_polynomials():
    # Reference: galois.Poly.factors over GF(2) (galois).
    import galois
    GF = galois.GF(2, compile="python-calculate")
    rng = np.random.default_rng(2026)
    for _ in range(60):
        d = int(rng.integers(1, 90))
        coeffs = [1] + [int(c) for c in rng.integers(0, 2, size=d)]
        if rng.random() < 0.3:  # force repeated factors sometimes
            coeffs = [int(c) for c in (galois.Poly(coeffs, field=GF) ** 2).coeffs]
        f = int("".join(map(str, coeffs)), 2)
        ours = sorted(gf2poly.factor(f))
        facs, mults = galois.Poly(coeffs, field=GF).factors()
        theirs = sorted((int(g), int(m)) for g, m in zip(facs, mults))
        assert ours == theirs
