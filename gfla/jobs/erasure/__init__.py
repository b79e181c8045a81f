"""Erasure coding: k data shards plus m parity shards, any k of which rebuild the data.

The job a storage engineer runs on gfla: build a systematic MDS generator over GF(2^8)
or GF(2^16) (Vandermonde made systematic, or Cauchy), compute the decoding matrix for any
set of lost shards, and encode / verify / decode / repair real files through a manifest
of SHA-256 checksums.

>>> from gfla.jobs.erasure import erasure_code
>>> code = erasure_code("GF(2^8)", k=10, m=4)
>>> plan = code.decoding_plan([2, 5, 11])
>>> plan.read
(0, 1, 3, 4, 6, 7, 8, 9, 10, 12)
>>> plan.matrix.shape
(3, 10)

Modules: :mod:`.codes` (generators, decoding plans, the table of erasure patterns),
:mod:`.regions` (matrix times byte buffers, on the compiled kernels),
:mod:`.manifest` (the ``manifest.json`` format), :mod:`.shards` (files),
:mod:`.demo` and :mod:`.bench`. Nothing here is constant-time.
"""

from .codes import (CONSTRUCTIONS, FILE_FIELDS, DecodingPlan, ErasureCode,
                    TooFewShardsError, cauchy_matrix, decoding_table, erasure_code,
                    generator_matrix, pattern_count, systematic_cauchy,
                    systematic_vandermonde, vandermonde_matrix)
from .manifest import MANIFEST_NAME, Manifest, load_manifest
from .regions import RegionMatrix
from .shards import (VerificationError, decode_file, encode_file, repair_shards,
                     verify_shards)

__all__ = ["CONSTRUCTIONS", "FILE_FIELDS", "ErasureCode", "DecodingPlan",
           "TooFewShardsError", "VerificationError", "erasure_code", "generator_matrix",
           "vandermonde_matrix", "cauchy_matrix", "systematic_vandermonde",
           "systematic_cauchy", "decoding_table", "pattern_count", "RegionMatrix",
           "MANIFEST_NAME", "Manifest", "load_manifest", "encode_file", "verify_shards",
           "decode_file", "repair_shards"]
