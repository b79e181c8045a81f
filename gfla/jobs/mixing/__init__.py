"""The mixing-layer job: what a block cipher's or hash's linear layer is, with
certificates, and a search of structured families for good ones.

* :mod:`.constructors` -- circulant, Hadamard form, Cauchy, Vandermonde, companion;
* :mod:`.analyze` -- invertibility, MDS (with a singular submatrix as certificate),
  branch numbers (with witnesses), binary expansion, XOR counts (naive, and the shorter
  of Paar's and the Boyar-Peralta programs, verified on every unit vector);
* :mod:`.search` -- family enumeration with early rejection, ranking by XOR count;
* :mod:`.demo`, :mod:`.bench` -- the demo section and the benchmark rows.

Over GF(2^k) (2 <= k <= 16) and GF(2). Nothing here is constant-time.

>>> import gfla
>>> from gfla.jobs.mixing import circulant, is_mds
>>> F = gfla.field("GF(2^8)", modulus=0x11b)
>>> is_mds(F, circulant(F, [2, 3, 1, 1]))["value"]
True
"""

from .analyze import (analyze_layer, bit_matrix, branch_numbers, evaluate_program,
                      format_program, is_mds, multiplication_matrix, naive_xor_count, xor_count)
from .constructors import (cauchy, circulant, companion, companion_power, hadamard_form,
                           vandermonde)
from .search import (FAMILIES, candidate, candidate_count, estimate, search_family,
                     write_jsonl)

__all__ = ["analyze_layer", "is_mds", "branch_numbers", "bit_matrix", "multiplication_matrix",
           "xor_count", "naive_xor_count", "evaluate_program", "format_program",
           "circulant", "hadamard_form", "cauchy", "vandermonde", "companion",
           "companion_power", "FAMILIES", "candidate", "candidate_count", "estimate",
           "search_family", "write_jsonl"]
