"""Algorithms generic over a field object (``gfla.fields``).

One module per family of algorithms: ``multiply`` (products), ``eliminate`` (rank,
rref, nullspace, solve, det), ``inverse``, ``charpoly`` (characteristic and minimal
polynomials), ``power`` (powers and multiplicative order), ``random``, and
``numtheory`` (integer factorisation with a time budget, orders in cyclic groups).
"""
