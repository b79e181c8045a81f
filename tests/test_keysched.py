"""The key-schedule job (gfla.jobs.keysched) against outside facts and brute force.

Sources, named beside each check:
* Simon32/64 test vector and key schedule: Beaulieu, Shors, Smith, Treatman-Clark, Weeks,
  Wingers, "The SIMON and SPECK Families of Lightweight Block Ciphers", 2013 (from
  memory).
* Orders of companion matrices of primitive polynomials: Lidl and Niederreiter, Finite
  Fields (the order of a primitive polynomial of degree d is 2^d - 1); the polynomials
  come from vectors/primitive_polynomials_gf2.json and are re-checked with galois.
* Rotation of a w-bit word by r has order w / gcd(r, w): common practice.
* 16-bit schedules: brute force over all 2^16 states, with the schedule written a
  second time as plain Python integer code.
"""

import json
import math
import pathlib

import numpy as np
import pytest

from gfla.errors import InputError
from gfla.jobs import keysched as ks
from gfla.jobs.keysched import bits as B
from gfla.jobs.keysched import examples
from gfla.jobs.keysched.errors import (InconsistentKnownBitsError, NonAffineScheduleError,
                                       SpecError)
from gfla.jobs.keysched.recover import KnownBit

ROOT = pathlib.Path(__file__).resolve().parent.parent
VECTORS = ROOT / "vectors"


# --------------------------------------------------------------------------- Simon32/64

def _rol16(x, r):
    return ((x << r) | (x >> (16 - r))) & 0xFFFF


def _simon32_encrypt(plaintext, round_keys):
    """Simon32/64 encryption (Beaulieu et al. 2013, Section 3, from memory):
    x <- y ^ ((S^1 x) & (S^8 x)) ^ (S^2 x) ^ k_i, y <- x."""
    x, y = plaintext
    for k in round_keys:
        x, y = y ^ (_rol16(x, 1) & _rol16(x, 8)) ^ _rol16(x, 2) ^ k, x
    return x, y


# z0 and the schedule recurrence of Simon32/64 (Beaulieu et al. 2013, from memory),
# written as plain Python for the callable form.
_Z0 = "11111010001001010110000111001101111101000100101011000011100110"


def _ror16(x, r):
    return ((x >> r) | (x << (16 - r))) & 0xFFFF


def simon32_update(state, round):
    k = [(state >> (16 * i)) & 0xFFFF for i in range(4)]
    tmp = _ror16(k[3], 3) ^ k[1]
    tmp ^= _ror16(tmp, 1)
    new = (~k[0] & 0xFFFF) ^ tmp ^ int(_Z0[round % 62]) ^ 3
    return (state >> 16) | (new << 48)


simon32_update.state_bits = 64
simon32_update.round_key_bits = list(range(16))


def test_simon32_64_test_vector():
    # Beaulieu et al. 2013, Simon32/64 test vector (from memory): key 1918 1110 0908 0100,
    # plaintext 6565 6877, ciphertext c69b e9bb.
    sched = ks.load_schedule(str(VECTORS / "keysched" / "simon32_64.toml"))
    key = B.parse_hex("1918 1110 0908 0100", 64)
    rows = ks.round_keys(sched, key, 0, 31)
    assert [r for r, _, _ in rows] == list(range(32))
    assert [rk for _, rk, _ in rows[:4]] == [0x0100, 0x0908, 0x1110, 0x1918]
    assert _simon32_encrypt((0x6565, 0x6877), [rk for _, rk, _ in rows]) == (0xC69B, 0xE9BB)


def test_simon32_callable_matches_spec():
    spec = ks.load_schedule("simon32-64")
    call = ks.from_callable(simon32_update)
    key = B.int_to_bits(0x1918111009080100, 64)
    a = ks.round_keys(spec, key, 0, 70)
    b = ks.round_keys(call, key, 0, 70)
    assert [rk for _, rk, _ in a] == [rk for _, rk, _ in b]
    assert np.array_equal(spec.M, call.M)


def test_simon32_period_and_far_rounds():
    sched = ks.load_schedule("simon32-64")
    a = ks.analyze(sched, up_to=4)
    assert a["invertible"]
    period = a["period_schedule"]["value"]
    order = a["period_linear"]["value"]
    # The linear part: M^order = I and no proper divisor works (direct matrix powers).
    M = sched.M.astype(np.int64)
    assert np.array_equal(B.power(M, order), np.eye(64, dtype=np.uint8))
    for p in _primes(order):
        assert not np.array_equal(B.power(M, order // p), np.eye(64, dtype=np.uint8))
    # The whole schedule repeats after `period` rounds, not after a proper divisor.
    rng = np.random.default_rng(1)
    keys = rng.integers(0, 2, (3, 64), dtype=np.uint8)
    orbits = [sched.states(k, 0, period + 62) for k in keys]
    for st in orbits:
        assert np.array_equal(st[period:period + 62], st[:62])
    for p in _primes(period):
        assert any(not np.array_equal(st[period // p:period // p + 62], st[:62])
                   for st in orbits)
    # Round 2^60 by x^R mod the characteristic polynomial agrees with the core's matrix
    # power of the augmented matrix (binary exponentiation, an independent path).
    A, z0 = sched.augmented()
    z = z0.copy()
    z[:64] = keys[0]
    R = 1 << 60
    want = (B.power(A, R).astype(np.int64) @ z.astype(np.int64)) % 2
    assert np.array_equal(sched.state(keys[0], R), want[:64].astype(np.uint8))
    # and the fast path agrees with stepping where both are possible
    assert np.array_equal(sched.state(keys[0], 5000), orbits[0][5000 % period])


def _primes(n):
    out, p = [], 2
    while p * p <= n:
        if n % p == 0:
            out.append(p)
            while n % p == 0:
                n //= p
        p += 1
    if n > 1:
        out.append(n)
    return out


def test_builtin_specs_match_vector_files():
    for name, filename in examples.FILES.items():
        assert (VECTORS / "keysched" / filename).read_text() == examples.SPECS[name]


# --------------------------------------------------------------------------- orders

def _companion(poly_int, d):
    C = np.zeros((d, d), dtype=np.uint8)
    for i in range(d - 1):
        C[i + 1, i] = 1
    for i in range(d):
        C[i, d - 1] = (poly_int >> i) & 1
    return C


def test_companion_of_primitive_polynomial_has_order_two_to_d_minus_one():
    # Lidl and Niederreiter, Finite Fields: a primitive polynomial of degree d has
    # order 2^d - 1, and so has its companion matrix. Polynomials from
    # vectors/primitive_polynomials_gf2.json, re-checked with galois.
    import galois
    table = json.loads((VECTORS / "primitive_polynomials_gf2.json").read_text())
    entries = [e for e in table["polynomials"] if e["degree"] >= 2]
    assert len(entries) >= 10
    for e in entries:
        d, f = e["degree"], e["integer"]
        coeffs = [(f >> i) & 1 for i in range(d, -1, -1)]
        assert galois.Poly(coeffs, field=galois.GF(2)).is_primitive()
        sched = ks.from_matrix(_companion(f, d))
        a = ks.analyze(sched, up_to=0)
        assert a["period_linear"] == {"exact": True, "value": (1 << d) - 1}, d
        assert a["minpoly_factor_degrees"] == [d]


def test_companion_degree_127():
    # x^127 + x + 1 is irreducible (checked with galois); 2^127 - 1 is prime (a Mersenne
    # prime, common practice), so its order is 2^127 - 1 (Lidl and Niederreiter).
    import galois
    f = (1 << 127) | 0b11
    coeffs = [(f >> i) & 1 for i in range(127, -1, -1)]
    assert galois.Poly(coeffs, field=galois.GF(2)).is_irreducible()
    assert galois.is_prime((1 << 127) - 1)
    a = ks.analyze(ks.from_matrix(_companion(f, 127)), up_to=0)
    assert a["period_linear"] == {"exact": True, "value": (1 << 127) - 1}


def _rotation_spec(w, r):
    return f"""
[state]
widths = [{w}]
[[step]]
op = "rotate"
word = "w0"
left = {r}
"""


@pytest.mark.parametrize("w,r", [(16, 3), (16, 4), (12, 8), (64, 24), (80, 30), (7, 0),
                                 (33, 11)])
def test_rotation_order(w, r):
    # Rotating a w-bit word by r has order w / gcd(r, w) (common practice).
    sched = ks.from_spec(ks.parse_spec(_rotation_spec(w, r)))
    a = ks.analyze(sched, up_to=0)
    assert a["period_linear"]["value"] == w // math.gcd(r, w)
    assert a["period_schedule"]["value"] == w // math.gcd(r, w)


def test_order_unavailable_gives_divisor_and_multiple(monkeypatch):
    # With no time to factor, the period is reported as proven bounds, never a guess.
    from gfla.jobs.keysched import gf2poly

    def no_time(self, e):
        value = gf2poly._cyclotomic_value(e)
        return ({}, [value]) if value > 1 else ({}, [])

    monkeypatch.setattr(gf2poly.FactorBudget, "part", no_time)
    f = (1 << 127) | 0b11
    a = ks.analyze(ks.from_matrix(_companion(f, 127)), up_to=0)
    p = a["period_linear"]
    # The order divides 2^127 - 1, which is prime: bounds 1 .. 2^127 - 1 are all one
    # can prove without the factorisation; the exact value must not be claimed.
    assert p["exact"] is False
    assert p["multiple"] == (1 << 127) - 1
    assert p["multiple"] % p["divisor"] == 0


# --------------------------------------------------------------------------- 16 bits

SPEC16_FIXED = """
name = "sixteen-fixed"
[state]
words = 4
width = 4
[round_key]
words = ["w0", "w1"]
[[step]]
op = "permute"
from = ["w1", "w2", "w3", "w0"]
[[step]]
op = "gf_mul"
words = ["w0"]
by = 3
modulus = 0x13
[[step]]
op = "xor"
into = "w2"
words = ["w0"]
[[step]]
op = "rotate"
word = "w3"
left = 1
[[step]]
op = "xor_constant"
into = "w1"
value = 0x5
"""

SPEC16_LFSR = SPEC16_FIXED.replace('name = "sixteen-fixed"', 'name = "sixteen-lfsr"') + """
[[step]]
op = "round_constant"
into = "w3"
[constants.rc]
lfsr = { width = 3, taps = [2, 1], seed = 1 }
"""

SPEC16_SINGULAR = """
name = "sixteen-singular"
[state]
widths = [8, 8]
[round_key]
bits = ["0..5"]
[[step]]
op = "shift"
word = "w1"
right = 1
into = "w1"
[[step]]
op = "xor"
into = "w0"
words = ["w1"]
[[step]]
op = "lfsr"
words = ["w0"]
taps = [7, 5]
steps = 2
[[step]]
op = "permute"
from = ["w1", "w0"]
[[step]]
op = "xor_constant"
into = "w0"
value = 0x3c
"""


def _gf16_mul(a, b):
    """GF(2^4) product modulo x^4 + x + 1 (shift and add, common practice)."""
    r = 0
    for i in range(4):
        if (b >> i) & 1:
            r ^= a << i
    for i in range(7, 3, -1):
        if (r >> i) & 1:
            r ^= 0x13 << (i - 4)
    return r


_MUL3 = np.array([_gf16_mul(a, 3) for a in range(16)], dtype=np.int64)


def _lfsr3(rounds):
    s, out = 1, []
    for _ in range(rounds):
        out.append(s)
        s = ((s << 1) | (((s >> 2) ^ (s >> 1)) & 1)) & 7
    return out


def _plain16(x, r, kind):
    """The 16-bit schedules written again as integer code on numpy arrays."""
    if kind == "singular":
        w0, w1 = x & 0xFF, (x >> 8) & 0xFF
        w1 = w1 >> 1
        w0 = w0 ^ w1
        for _ in range(2):
            fb = ((w0 >> 7) ^ (w0 >> 5)) & 1
            w0 = ((w0 << 1) | fb) & 0xFF
        w0, w1 = w1, w0
        w0 = w0 ^ 0x3C
        return w0 | (w1 << 8)
    w = [(x >> (4 * i)) & 0xF for i in range(4)]
    w = [w[1], w[2], w[3], w[0]]
    w[0] = _MUL3[w[0]]
    w[2] = w[2] ^ w[0]
    w[3] = ((w[3] << 1) | (w[3] >> 3)) & 0xF
    w[1] = w[1] ^ 0x5
    if kind == "lfsr":
        w[3] = w[3] ^ _lfsr3(r + 1)[r]
    return w[0] | (w[1] << 4) | (w[2] << 8) | (w[3] << 12)


_SPECS16 = {"fixed": SPEC16_FIXED, "lfsr": SPEC16_LFSR, "singular": SPEC16_SINGULAR}
_RK16 = {"fixed": (0xFF, 0), "lfsr": (0xFF, 0), "singular": (0x3F, 0)}


def _tables(kind, rounds):
    X = np.arange(1 << 16, dtype=np.int64)
    return [_plain16(X, r, kind) for r in range(rounds)]


def _perm_order(p):
    seen = np.zeros(p.size, dtype=bool)
    L = 1
    for s in range(p.size):
        if seen[s]:
            continue
        c, x = 0, s
        while not seen[x]:
            seen[x] = True
            x = p[x]
            c += 1
        L = math.lcm(L, c)
    return L


@pytest.fixture(scope="module")
def sixteen():
    out = {}
    for kind, text in _SPECS16.items():
        out[kind] = ks.from_spec(ks.parse_spec(text, f"<{kind}>"))
    return out


@pytest.mark.parametrize("kind", ["fixed", "lfsr", "singular"])
def test_16bit_spec_matches_plain_code(sixteen, kind):
    sched = sixteen[kind]
    rng = np.random.default_rng(5)
    for key in rng.integers(0, 1 << 16, 20):
        states = sched.states(B.int_to_bits(int(key), 16), 0, 20)
        x = int(key)
        for r in range(21):
            assert B.bits_to_int(states[r]) == x
            x = int(_plain16(np.int64(x), r, kind))


@pytest.mark.parametrize("kind", ["fixed", "lfsr"])
def test_16bit_period_brute_force(sixteen, kind):
    a = ks.analyze(sixteen[kind], up_to=0)
    tables = _tables(kind, 7)
    ident = np.arange(1 << 16)
    # linear part: the map x -> f(x) ^ f(0) on all 2^16 states
    lin = tables[0] ^ tables[0][0]
    assert a["period_linear"] == {"exact": True, "value": _perm_order(lin)}
    # whole schedule: least K with state_(r+K) = state_r for every key and round
    P = 1 if kind == "fixed" else 7          # the LFSR sequence repeats every 7 rounds
    assert _lfsr3(15)[7:14] == _lfsr3(7)
    block = ident.copy()
    for r in range(P):
        block = tables[r][block]
    K = P * _perm_order(block)
    assert a["period_schedule"]["value"] == K
    for d in {K // p for p in _primes(K)}:
        cur = ident.copy()
        ok = True
        for r in range(d):
            cur = tables[r % P][cur]
        ok = np.array_equal(cur, ident)
        if ok:  # state_d = state_0; also the later rounds must repeat
            nxt = tables[d % P][cur]
            ok = np.array_equal(nxt, tables[0])
        assert not ok


@pytest.mark.parametrize("kind", ["fixed", "lfsr", "singular"])
def test_16bit_fixed_spaces_brute_force(sixteen, kind):
    a = ks.analyze(sixteen[kind], up_to=30)
    tables = _tables(kind, 30)
    ident = np.arange(1 << 16)
    cur = ident.copy()
    for fs in a["fixed_spaces"]:
        r = fs["rounds"]
        cur = tables[r - 1][cur]
        count = int((cur == ident).sum())
        want = 0 if fs["dimension"] is None else 1 << fs["dimension"]
        assert count == want, (kind, r)
        if fs["example"] is not None:
            assert cur[fs["example"]] == fs["example"]


def _affine_space(result):
    keys = {result["particular"]}
    for v in result["basis"]:
        keys |= {k ^ v for k in keys}
    return keys


@pytest.mark.parametrize("kind", ["fixed", "lfsr", "singular"])
def test_16bit_recovery_brute_force(sixteen, kind):
    sched = sixteen[kind]
    tables = _tables(kind, 12)
    X = np.arange(1 << 16)
    states = [X]
    for r in range(12):
        states.append(tables[r][states[-1]])
    mask, shift = _RK16[kind]
    rng = np.random.default_rng(11)
    key = int(rng.integers(0, 1 << 16))
    # a whole round key
    for R in (0, 3, 11):
        rk = (int(states[R][key]) >> shift) & mask
        res = ks.recover_round_key(sched, R, rk)
        want = set(np.flatnonzero(((states[R] >> shift) & mask) == rk).tolist())
        assert _affine_space(res) == want
        assert res["dimension"] == int(math.log2(len(want)))
        det = res["determined_mask"]
        assert all((k ^ key) & det == 0 for k in want)
        free = [b for b in range(16) if not (det >> b) & 1]
        assert all(len({(k >> b) & 1 for k in want}) == 2 for b in free)
    # scattered known bits
    picks = [(0, 0), (1, 5), (2, 1), (4, 3), (7, 2), (9, 0), (9, 4), (10, 5)]
    known = [KnownBit(r, b, (int(states[r][key]) >> b) & 1) for r, b in picks]
    res = ks.recover_known(sched, known)
    sel = np.ones(1 << 16, dtype=bool)
    for kb in known:
        sel &= ((states[kb.round] >> kb.bit) & 1) == kb.value
    want = set(np.flatnonzero(sel).tolist())
    assert key in want
    assert _affine_space(res) == want
    # enough bits determine the key
    full = [KnownBit(r, b, (int(states[r][key]) >> b) & 1) for r in range(12)
            for b in range(6)]
    res = ks.recover_known(sched, full)
    sel = np.ones(1 << 16, dtype=bool)
    for kb in full:
        sel &= ((states[kb.round] >> kb.bit) & 1) == kb.value
    want = set(np.flatnonzero(sel).tolist())
    assert _affine_space(res) == want
    if len(want) == 1:
        assert res["key"] == key


def test_16bit_inconsistent_known_bits_certificate(sixteen):
    sched = sixteen["fixed"]
    tables = _tables("fixed", 12)
    states = [np.arange(1 << 16)]
    for r in range(12):
        states.append(tables[r][states[-1]])
    key = 0x1234
    known = [KnownBit(r, b, (int(states[r][key]) >> b) & 1, 10 + 8 * r + b)
             for r in range(6) for b in range(8)]
    bad = known[-1]
    known[-1] = KnownBit(bad.round, bad.bit, bad.value ^ 1, bad.line)
    with pytest.raises(InconsistentKnownBitsError) as info:
        ks.recover_known(sched, known)
    eqs = info.value.certificate()["conflicting_equations"]
    assert eqs and all({"round", "bit", "value", "line"} <= set(e) for e in eqs)
    # brute force: no key satisfies the conflicting equations together
    sel = np.ones(1 << 16, dtype=bool)
    for e in eqs:
        sel &= ((states[e["round"]] >> e["bit"]) & 1) == e["value"]
    assert not sel.any()


def test_16bit_three_descriptions_agree(tmp_path, sixteen):
    # TOML spec, raw matrix (.npy and text, [M | c]) and a Python callable.
    spec = sixteen["fixed"]
    Mc = np.concatenate([spec.M, spec.c[:, None]], axis=1).astype(np.int64)
    np.save(tmp_path / "m.npy", Mc)
    (tmp_path / "m.txt").write_text("\n".join(" ".join(map(str, row)) for row in Mc))
    from_npy = ks.load_schedule(str(tmp_path / "m.npy"))
    from_txt = ks.load_schedule(str(tmp_path / "m.txt"))

    def update(x):
        return int(_plain16(np.int64(x), 0, "fixed"))

    from_fn = ks.from_callable(update, state_bits=16)
    ref = ks.analyze(spec, up_to=20)
    for other in (from_npy, from_txt, from_fn):
        assert np.array_equal(other.M, spec.M) and np.array_equal(other.c, spec.c)
        a = ks.analyze(other, up_to=20)
        assert a["period_schedule"] == ref["period_schedule"]
        assert a["fixed_spaces"] == ref["fixed_spaces"]


def test_callable_module_function_and_bits_form(tmp_path, monkeypatch):
    mod = tmp_path / "my_sched.py"
    mod.write_text(
        "import numpy as np\n"
        "def step(s):\n"
        "    s = np.asarray(s)\n"
        "    return np.roll(s, 3) ^ np.concatenate([[1], np.zeros(len(s) - 1, int)])\n"
        "step.state_bits = 24\n"
        "step.state_form = 'bits'\n")
    monkeypatch.chdir(tmp_path)
    sched = ks.load_schedule("my_sched:step")
    assert sched.n == 24
    a = ks.analyze(sched, up_to=0)
    assert a["period_linear"]["value"] == 8     # rotation of 24 bits by 3 (common practice)
    also = ks.load_schedule(f"{mod}:step")
    assert np.array_equal(also.M, sched.M)


# --------------------------------------------------------------------------- refusals

SBOX_SPEC = """
[state]
words = 4
width = 4
[[step]]
op = "sbox"
words = ["w1"]
table = [12, 5, 6, 11, 9, 0, 10, 13, 3, 14, 15, 8, 4, 7, 1, 2]
[[step]]
op = "permute"
from = ["w1", "w2", "w3", "w0"]
"""


def test_non_affine_schedule_refused_with_witness():
    spec = ks.parse_spec(SBOX_SPEC, "<sbox>")
    with pytest.raises(NonAffineScheduleError) as info:
        ks.from_spec(spec)
    exc = info.value
    f = lambda v: B.bits_to_int(spec.evaluate(B.int_to_bits(v, 16)[None, :], {})[0])
    assert f(exc.x ^ exc.y) != f(exc.x) ^ f(exc.y) ^ f(0)
    cert = exc.certificate()
    assert int(cert["difference"], 16) == f(exc.x ^ exc.y) ^ f(exc.x) ^ f(exc.y) ^ f(0)


def test_non_affine_callable_refused():
    def square_ish(x):
        return (x * x + 1) & 0xFFFF

    with pytest.raises(NonAffineScheduleError) as info:
        ks.from_callable(square_ish, state_bits=16)
    e = info.value
    f = square_ish
    assert f(e.x ^ e.y) != f(e.x) ^ f(e.y) ^ f(0)


def _spec_error(text):
    with pytest.raises(SpecError) as info:
        ks.parse_spec(text, "my.toml")
    return info.value


def test_spec_errors_name_file_line_and_key():
    text = SPEC16_FIXED.replace('op = "rotate"', 'op = "rotat"')
    e = _spec_error(text)
    line = text.splitlines().index('op = "rotat"') + 1
    assert e.line == line and e.key == "step[3].op"
    assert str(e).startswith(f"my.toml:{line}: step[3].op: unknown operation 'rotat'")
    e = _spec_error(SPEC16_FIXED.replace("width = 4", "width = 4\nbits = 20"))
    assert "add up to 16 bits, not 20" in str(e) and e.key == "state.bits"
    e = _spec_error(SPEC16_FIXED.replace('from = ["w1", "w2", "w3", "w0"]',
                                         'from = ["w1", "w2", "w1", "w0"]'))
    assert "not a permutation" in str(e) and e.key == "step[0].from"
    e = _spec_error(_rotation_spec(8, 1) + '[[step]]\nop = "permute_bits"\nword = "w0"\n'
                    'from = [0, 1, 2, 3, 4, 5, 6, 6]\n')
    assert "not a permutation of 0 .. 7 (6 appears twice)" in str(e)
    e = _spec_error("[state]\nwidths = [4]\n[[step]]\nop = \"xor\"\ninto = \"w0\"\n"
                    "words = [\"w9\"]\n")
    assert "no word named 'w9'" in str(e) and e.line == 6
    e = _spec_error("[state\nwidths = [4]\n")
    assert str(e).startswith("my.toml:1: not valid TOML")


def test_key_and_round_input_errors():
    sched = ks.load_schedule("simon32-64")
    with pytest.raises(InputError, match="wrong length"):
        B.parse_hex("0x1" + "0" * 16, 64)
    with pytest.raises(InputError, match="wrong length"):
        ks.round_keys(sched, 1 << 64, 0, 1)
    with pytest.raises(InputError, match="out of range"):
        ks.parse_known_bits("3 16 1\n", sched.key_bits, "k.txt")
    with pytest.raises(InputError, match="k.txt:2: value '2' is not 0 or 1"):
        ks.parse_known_bits("3 1 1\n3 2 2\n", sched.key_bits, "k.txt")
    finite = ks.from_spec(ks.parse_spec(
        "[state]\nwidths = [8]\n[constants.c]\nvalues = [1, 2, 3]\n"
        "[[step]]\nop = \"round_constant\"\ninto = \"w0\"\n"))
    ks.round_keys(finite, 5, 0, 3)
    with pytest.raises(InputError, match="past the end of the listed round constants"):
        ks.round_keys(finite, 5, 0, 4)


def test_known_bits_ranges_and_expressions():
    kb = ks.parse_known_bits("# leak\n2^4, 8..11, 0xa\n0 0 1  # a comment\n", 16)
    assert kb == [(16, 8, 0, 2), (16, 9, 1, 2), (16, 10, 0, 2), (16, 11, 1, 2),
                  (0, 0, 1, 3)]


def test_callable_whose_linear_part_varies_is_refused():
    from gfla.jobs.keysched.errors import VaryingLinearPartError

    def wobble(x, round):
        s = 1 + (round % 2)
        return ((x << s) | (x >> (16 - s))) & 0xFFFF

    with pytest.raises(VaryingLinearPartError) as info:
        ks.from_callable(wobble, state_bits=16)
    cert = info.value.certificate()
    r, j = cert["round"], cert["state_bit"]
    assert r % 2 == 1
    assert int(cert["f_r(e_i)^f_r(0)"], 16) == wobble(1 << j, r) ^ wobble(0, r)
    assert int(cert["f_0(e_i)^f_0(0)"], 16) == wobble(1 << j, 0) ^ wobble(0, 0)


def test_toml_specs_never_import_or_run_code(tmp_path, monkeypatch):
    """A TOML spec is data: loading one imports nothing and runs nothing, even when its
    strings look like ``module:function`` or like code (the callable form is the only
    one that runs user code, as the README says)."""
    import builtins
    import importlib
    import importlib.util

    def refuse(*args, **kwargs):
        raise AssertionError(f"a TOML spec made gfla import or run code: {args!r}")

    spec = (ROOT / "vectors" / "keysched" / "wrenlock80.toml").read_text()
    spec = spec.replace('name = "Wrenlock-80 key schedule (invented)"',
                        'name = "os:system"\ndescription = "__import__(\'os\').system(\'false\')"')
    path = tmp_path / "os:system.toml"
    path.write_text(spec)
    ks.load_schedule(str(path))  # warm: the modules gfla itself needs are imported here
    monkeypatch.setattr(importlib, "import_module", refuse)
    monkeypatch.setattr(importlib.util, "spec_from_file_location", refuse)
    monkeypatch.setattr(builtins, "eval", refuse)
    monkeypatch.setattr(builtins, "exec", refuse)
    schedule = ks.load_schedule(str(path))
    assert schedule.name == "os:system"
