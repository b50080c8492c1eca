"""The compiled keyed ids (acidbase/_idhash.c) against the standard library.

The history store keeps a patient id only as HMAC-SHA256 with the site key (RFC 2104,
FIPS 198-1) truncated to 16 bytes (RFC 2104 section 5).  The compiled edge computes it
from an Arrow text array's buffers; Python's ``hmac``/``hashlib`` are the oracle, and
the Python fallback (``history._Hmac``) must agree with both.  Hypothesis generates
ids (empty, white space of every kind, other scripts, longer than a 64-byte block,
missing) and keys (empty, one block, longer than a block), over sliced arrays.  Set
ACIDBASE_REQUIRE_COMPILED=1 to make a missing build fail these tests instead of
skipping them.
"""

from __future__ import annotations

import hashlib
import hmac
import os
from contextlib import contextmanager
from unittest import mock

import numpy as np
import pyarrow as pa
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from acidbase import history

compiled = pytest.mark.skipif(
    history._idhash is None and not os.environ.get("ACIDBASE_REQUIRE_COMPILED"),
    reason="the compiled keyed ids are not built (no C compiler at install)")


def oracle(word: str | None, key: bytes) -> bytes | None:
    """The standard library's HMAC-SHA256, first 16 bytes; None for no id (missing,
    empty or white space as str.strip sees it)."""
    if word is None or not word.strip():
        return None
    return hmac.digest(key, word.encode("utf-8"), hashlib.sha256)[:16]


@contextmanager
def route(fast: bool):
    """The compiled edge with the x86 SHA extensions (where the processor has them) or
    its portable C: both are held to the same oracle."""
    history._idhash.accelerated(fast)
    try:
        yield
    finally:
        history._idhash.accelerated(True)


def compiled_ids(words: pa.Array, key: bytes, fast: bool = True
                 ) -> tuple[np.ndarray, np.ndarray]:
    """``history.keyed_ids`` by the compiled edge (never the fallback)."""
    raw = np.zeros((len(words), 16), dtype=np.uint8)
    blank = np.ones(len(words), dtype=np.uint8)
    if len(words):
        bufs = words.buffers()
        with route(fast):
            history._idhash.hmac16(key, len(words), words.offset, bufs[0], bufs[1],
                                   bufs[2] if bufs[2] is not None else b"",
                                   pa.types.is_large_string(words.type), raw, blank)
    return raw, blank.view(bool)


def as_list(raw: np.ndarray, blank: np.ndarray) -> list[bytes | None]:
    return [None if b else bytes(r) for r, b in zip(raw, blank)]


# White space of every kind Python knows, next to look-alikes that are not white space.
_SPACES = "\t\n\x0b\x0c\r\x1c\x1d\x1e\x1f \x85\xa0\u1680\u2000\u2005\u200a\u2028\u2029" \
          "\u202f\u205f\u3000"
_NOT_SPACES = "\u200b\u180e\ufeff\x00\x1b\u00ad"
ids = st.one_of(
    st.none(),
    st.text(max_size=12),
    st.text(alphabet=_SPACES + _NOT_SPACES, max_size=6),
    st.text(min_size=50, max_size=200),  # beyond one 64-byte block, and the 55/56 edge
    st.builds(lambda n: "x" * n, st.integers(50, 130)),
    st.from_regex(r"MRN-[0-9]{4,9}", fullmatch=True),
)
keys = st.one_of(st.binary(max_size=80), st.binary(min_size=60, max_size=200))


@compiled
@pytest.mark.parametrize("fast", [True, False])
@settings(max_examples=300, deadline=None)
@given(words=st.lists(ids, max_size=40), key=keys, cut=st.integers(0, 5),
       large=st.booleans())
def test_compiled_keyed_ids_are_the_standard_librarys_hmac(fast, words, key, cut, large):
    """Byte for byte, also for a slice of an array (its offset into the buffers) and
    for large text arrays (64-bit offsets); both routes of the compiled edge."""
    arr = pa.array(words, pa.large_string() if large else pa.string())
    arr = arr.slice(min(cut, len(words)))
    want = [oracle(w, key) for w in words[min(cut, len(words)):]]
    assert as_list(*compiled_ids(arr, key, fast)) == want


@settings(max_examples=100, deadline=None)
@given(words=st.lists(ids, max_size=30), key=keys)
def test_the_python_fallback_is_the_standard_librarys_hmac(words, key):
    """The fallback (``_Hmac``, copied hash states) gives the one-shot HMAC."""
    with mock.patch.dict(os.environ, {"ACIDBASE_PURE_PYTHON": "1"}):
        got = history.keyed_ids(pa.array(words, pa.string()), key)
    assert as_list(*got) == [oracle(w, key) for w in words]


@compiled
def test_every_code_point_is_blank_exactly_when_str_strip_says_so():
    """Python's white space (str.isspace: bidirectional class WS, B or S, or category
    Zs) for every code point but the surrogates, alone and beside a space."""
    chars = [chr(c) for c in range(0x110000) if not 0xD800 <= c <= 0xDFFF]
    key = b"k" * 32
    for words in (chars, [" " + c + "\u3000" for c in chars]):
        _, blank = compiled_ids(pa.array(words, pa.string()), key)
        want = np.array([not w.strip() for w in words])
        assert np.array_equal(blank, want)


@compiled
def test_bytes_that_are_not_utf8_are_hashed_not_taken_for_space():
    """Cut-short and stray continuation bytes are not white space (an Arrow text array
    is valid UTF-8, but the C code does not rely on it)."""
    words = [b"\xe3\x80", b"\x80 ", b" \xc2", b"\xf0\x9f\x98"]
    data = b"".join(words)
    offsets = np.cumsum([0] + [len(w) for w in words]).astype(np.int32)
    arr = pa.Array.from_buffers(pa.string(), len(words), [None, pa.py_buffer(offsets),
                                                          pa.py_buffer(data)])
    raw, blank = compiled_ids(arr, b"key")
    assert not blank.any()
    assert [bytes(r) for r in raw] == [hmac.digest(b"key", w, hashlib.sha256)[:16]
                                       for w in words]


# RFC 4231 section 4, test cases 1-4, 6 and 7 (HMAC-SHA-256; the keys, data and
# outputs as printed there, the data need not be UTF-8), and case 5 (truncation to
# 128 bits): the store keeps the first 16 bytes of each.
RFC_4231 = [
    (b"\x0b" * 20, b"Hi There",
     "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7"),
    (b"Jefe", b"what do ya want for nothing?",
     "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"),
    (b"\xaa" * 20, b"\xdd" * 50,
     "773ea91e36800e46854db8ebd09181a72959098b3ef8c122d9635514ced565fe"),
    (bytes(range(1, 26)), b"\xcd" * 50,
     "82558a389a443c0ea4cc819899f2083a85f0faa3e578f8077a2e3ff46729665b"),
    (b"\x0c" * 20, b"Test With Truncation", "a3b6167473100ee06e0c796c2955552b"),
    (b"\xaa" * 131, b"Test Using Larger Than Block-Size Key - Hash Key First",
     "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54"),
    (b"\xaa" * 131, b"This is a test using a larger than block-size key and a larger "
     b"than block-size data. The key needs to be hashed before being used by the HMAC "
     b"algorithm.", "9b09ffa71b942fcb27635fbcd5b0e944bfdc63644f0713938a7f51535c3a35e2"),
]


@compiled
@pytest.mark.parametrize("fast", [True, False])
@pytest.mark.parametrize("key, data, want", RFC_4231)
def test_rfc_4231_test_vectors_give_their_first_16_bytes(key, data, want, fast):
    offsets = pa.py_buffer(np.array([0, len(data)], dtype=np.int32))
    arr = pa.Array.from_buffers(pa.string(), 1, [None, offsets, pa.py_buffer(data)])
    raw, blank = compiled_ids(arr, key, fast)
    assert not blank[0] and bytes(raw[0]).hex() == want[:32]


# SHA-256 examples published with FIPS 180-4 (NIST, "SHA256.pdf", Examples with
# Intermediate Values, csrc.nist.gov): one block, two blocks; the empty message and a
# million "a" (FIPS 180-2 Appendix B.3), value from memory, checked by hashlib below.
FIPS_180 = [
    (b"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"),
    (b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq",
     "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"),
    (b"", "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"),
    (b"a" * 1_000_000, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0"),
]


@compiled
@pytest.mark.parametrize("fast", [True, False])
@pytest.mark.parametrize("data, want", FIPS_180)
def test_fips_180_4_examples(data, want, fast):
    with route(fast):
        got = history._idhash.sha256(data).hex()
    assert got == want == hashlib.sha256(data).hexdigest()


@compiled
@pytest.mark.parametrize("fast", [True, False])
@settings(max_examples=200, deadline=None)
@given(data=st.binary(max_size=300))
def test_sha256_of_every_length_is_hashlibs(fast, data):
    """Every padding case: lengths around 55, 56 and 64 bytes of FIPS 180-4 5.1.1."""
    with route(fast):
        got = history._idhash.sha256(data)
    assert got == hashlib.sha256(data).digest()


@compiled
def test_the_portable_route_can_be_chosen_and_the_fast_one_is_used_where_it_exists():
    """accelerated(False) forces the portable C; accelerated(True) answers whether the
    processor's SHA extensions are used (on x86-64 with them: /proc/cpuinfo "sha_ni")."""
    with route(False):
        assert history._idhash.accelerated() is False
    flags = open("/proc/cpuinfo").read() if os.path.exists("/proc/cpuinfo") else ""
    if " sha_ni" in flags and os.uname().machine == "x86_64":
        assert history._idhash.accelerated() is True


@compiled
def test_hash_ids_is_the_same_with_and_without_the_compiled_edge(monkeypatch):
    """The store's public forms (hex text; 16 bytes with the run's earliest times)
    whichever route computes them."""
    words = pa.array(["P-1", None, " ", "P-2", "P-1", "é", "\u3000", ""] * 3).slice(2)
    key = b"site-key-for-tests-only-0123456789"
    fast = history.hash_ids(words, key)
    monkeypatch.setenv("ACIDBASE_PURE_PYTHON", "1")
    slow = history.hash_ids(words, key)
    assert fast.to_pylist() == slow.to_pylist() == [
        (oracle(w, key) or b"").hex() for w in words.to_pylist()]


@compiled
def test_a_buffer_too_short_for_the_array_is_refused_not_read_past():
    raw = np.zeros((3, 16), dtype=np.uint8)
    blank = np.zeros(3, dtype=np.uint8)
    offsets = np.array([0, 1, 2], dtype=np.int32)  # one offset short for 3 ids
    with pytest.raises(ValueError, match="shorter"):
        history._idhash.hmac16(b"k", 3, 0, None, offsets, b"ab", False, raw, blank)
    offsets = np.array([0, 1, 2, 99], dtype=np.int32)  # past the data
    with pytest.raises(ValueError, match="outside"):
        history._idhash.hmac16(b"k", 3, 0, None, offsets, b"abc", False, raw, blank)


@compiled
def test_a_missing_id_is_blank_even_when_its_slot_holds_bytes():
    """Arrow lets a null slot span data (an array filtered or built elsewhere): the
    validity bitmap decides, not the bytes."""
    data = b"P-1P-2P-3"
    offsets = pa.py_buffer(np.array([0, 3, 6, 9], dtype=np.int32))
    valid = pa.py_buffer(np.packbits([True, False, True], bitorder="little").tobytes())
    arr = pa.Array.from_buffers(pa.string(), 3, [valid, offsets, pa.py_buffer(data)],
                                null_count=1)
    raw, blank = compiled_ids(arr, b"key")
    assert blank.tolist() == [False, True, False]
    assert bytes(raw[2]) == oracle("P-3", b"key") and not raw[1].any()
