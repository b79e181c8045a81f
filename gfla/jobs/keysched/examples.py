"""Built-in example specs, usable by name wherever a SPEC is taken.

``simon32-64`` is Simon32/64's key schedule (Beaulieu et al., 2013; written from
memory, checked by the test vector in ``tests/test_keysched.py``). ``wrenlock-80`` is the
key schedule of Wrenlock, a toy cipher invented for gfla's demo: not a published design.
The same texts are in ``vectors/keysched/`` (a test keeps them identical).
"""

__all__ = ["SPECS", "FILES"]

SIMON32_64 = r"""# Simon32/64 key schedule (m = 4 key words of 16 bits, 32 rounds).
# Source: R. Beaulieu, D. Shors, J. Smith, S. Treatman-Clark, B. Weeks, L. Wingers,
# "The SIMON and SPECK Families of Lightweight Block Ciphers", Cryptology ePrint
# Archive 2013/404, Section 3 (key expansion) and the constant sequence z0; written
# here from memory. tests/test_keysched.py drives a Simon32/64 encryption with these
# round keys and checks the paper's test vector.
#
# For i >= 4:  k[i] = ~k[i-4] ^ (I ^ S^-1)(S^-3 k[i-1] ^ k[i-3]) ^ z0[(i-4) mod 62] ^ 3
# The state is the window (k[r], k[r+1], k[r+2], k[r+3]) = (k0, k1, k2, k3); round
# key r is k0. A key written as 1918 1110 0908 0100 is k3 k2 k1 k0, i.e. the state
# integer 0x1918111009080100 (bit i = state bit i, k0 in the low 16 bits).
name = "Simon32/64 key schedule"
rounds = 32

[state]
widths = [16, 16, 16, 16]
names = ["k0", "k1", "k2", "k3"]
bits = 64

[scratch]
widths = [16, 16]
names = ["t", "u"]

[round_key]
words = ["k0"]

[constants.z0]
bits = "11111010001001010110000111001101111101000100101011000011100110"
repeat = true

[[step]]          # t = S^-3 k3 (rotate right by 3)
op = "rotate"
word = "k3"
right = 3
into = "t"

[[step]]          # t ^= k1
op = "xor"
into = "t"
words = ["k1"]

[[step]]          # t ^= S^-1 t
op = "rotate"
word = "t"
right = 1
into = "u"

[[step]]
op = "xor"
into = "t"
words = ["u"]

[[step]]          # new word = k0 ^ t ^ 0xfffc ^ z0 bit  (~k0 ^ 3 = k0 ^ 0xfffc)
op = "xor"
into = "k0"
words = ["t"]

[[step]]
op = "xor_constant"
into = "k0"
value = 0xfffc

[[step]]
op = "round_constant"
into = "k0"
sequence = "z0"

[[step]]          # slide the window: (k0, k1, k2, k3) <- (k1, k2, k3, new)
op = "permute"
words = ["k0", "k1", "k2", "k3"]
from = ["k1", "k2", "k3", "k0"]
"""

WRENLOCK_80 = r"""# Wrenlock-80 key schedule: INVENTED for gfla's demo (Wrenlock is a toy cipher that
# does not exist). It is not a published design and these are not reference values.
#
# The 80-bit key state is 20 cells of 4 bits (c0 = state bits 0..3, ..., c19 = bits
# 76..79); round key r is the 32 bits of cells c0..c7 of state r.
name = "Wrenlock-80 key schedule (invented)"
rounds = 28

[state]
words = 20
width = 4
names = ["c0", "c1", "c2", "c3", "c4", "c5", "c6", "c7", "c8", "c9",
         "c10", "c11", "c12", "c13", "c14", "c15", "c16", "c17", "c18", "c19"]
bits = 80

[round_key]
words = ["c0", "c1", "c2", "c3", "c4", "c5", "c6", "c7"]

[constants.rc]                  # 4-bit LFSR, x^4 + x^3 + 1 feedback, seed 1
lfsr = { width = 4, taps = [3, 2], seed = 1 }

[[step]]                        # rotate the cell array by 7 cells: c_i <- c_(i+7 mod 20)
op = "permute"
from = ["c7", "c8", "c9", "c10", "c11", "c12", "c13", "c14", "c15", "c16",
        "c17", "c18", "c19", "c0", "c1", "c2", "c3", "c4", "c5", "c6"]

[[step]]                        # two cells through GF(2^4) multiplications
op = "gf_mul"
words = ["c0", "c10"]
by = 0x9
modulus = 0x13

[[step]]                        # mix: c4 ^= c0, c14 ^= c10
op = "xor"
into = "c4"
words = ["c0"]

[[step]]
op = "xor"
into = "c14"
words = ["c10"]

[[step]]                        # one LFSR step on a cell
op = "lfsr"
words = ["c7"]
taps = [3, 0]

[[step]]                        # rotate a cell by one bit
op = "rotate"
word = "c12"
left = 1

[[step]]                        # the round constant enters cell c19
op = "round_constant"
into = "c19"
sequence = "rc"
"""

SPECS = {"simon32-64": SIMON32_64, "wrenlock-80": WRENLOCK_80}
FILES = {"simon32-64": "simon32_64.toml", "wrenlock-80": "wrenlock80.toml"}
