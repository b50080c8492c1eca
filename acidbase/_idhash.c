/* The history store's keyed patient ids, for many ids at once (acidbase._idhash).
 *
 * The function the store uses, ``hmac16``: for each id of an Arrow string array (its
 * validity bitmap, offsets and data buffers, and its offset into them), HMAC-SHA256 with the
 * site key, truncated to its first 16 bytes, written into one output buffer; a
 * missing id, or one that is empty or only white space (as Python's ``str.strip``
 * sees it), is marked "blank" instead and its 16 bytes are zero.  No Python object
 * is made per id, and the interpreter lock is released while it works.
 *
 * SHA-256: NIST FIPS 180-4, "Secure Hash Standard (SHS)", 2015, sections 4.1.2,
 * 4.2.2, 5.1.1, 5.3.3 and 6.2.  HMAC: Krawczyk, Bellare, Canetti, RFC 2104, "HMAC:
 * Keyed-Hashing for Message Authentication", 1997, section 2 (a key longer than the
 * 64-byte block is hashed first; the inner and outer pads 0x36 and 0x5C); the
 * truncation to the leftmost 128 bits is RFC 2104 section 5.
 *
 * The Python code in acidbase/history.py (``_Hmac``, on hashlib and the standard
 * library's white-space test) is the fallback when this is not built, and the
 * reference it is compared with byte for byte (tests/test_idhash.py, with the test
 * vectors of FIPS 180-4's examples and RFC 4231).  It decides nothing: which ids are
 * compared is decided in Python.
 */
#ifndef Py_LIMITED_API
#define Py_LIMITED_API 0x030B0000
#endif
#define PY_SSIZE_T_CLEAN
#include <Python.h>

#include <stdint.h>
#include <string.h>

/* FIPS 180-4 section 4.2.2: the first 32 bits of the fractional parts of the cube
 * roots of the first 64 primes. */
static const uint32_t K[64] = {
    0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4,
    0xab1c5ed5, 0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe,
    0x9bdc06a7, 0xc19bf174, 0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f,
    0x4a7484aa, 0x5cb0a9dc, 0x76f988da, 0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7,
    0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967, 0x27b70a85, 0x2e1b2138, 0x4d2c6dfc,
    0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85, 0xa2bfe8a1, 0xa81a664b,
    0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070, 0x19a4c116,
    0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
    0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7,
    0xc67178f2};

/* FIPS 180-4 section 5.3.3: the initial hash value. */
static const uint32_t H0[8] = {0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a,
                               0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19};

#define ROTR(x, n) (((x) >> (n)) | ((x) << (32 - (n))))

/* FIPS 180-4 section 6.2.2: one 512-bit block into the state (portable C). */
static void compress_c(uint32_t st[8], const unsigned char *p) {
    uint32_t w[64], a, b, c, d, e, f, g, h, t1, t2;
    int i;
    for (i = 0; i < 16; i++)
        w[i] = ((uint32_t)p[4 * i] << 24) | ((uint32_t)p[4 * i + 1] << 16) |
               ((uint32_t)p[4 * i + 2] << 8) | (uint32_t)p[4 * i + 3];
    for (i = 16; i < 64; i++) {
        uint32_t s0 = ROTR(w[i - 15], 7) ^ ROTR(w[i - 15], 18) ^ (w[i - 15] >> 3);
        uint32_t s1 = ROTR(w[i - 2], 17) ^ ROTR(w[i - 2], 19) ^ (w[i - 2] >> 10);
        w[i] = w[i - 16] + s0 + w[i - 7] + s1;
    }
    a = st[0]; b = st[1]; c = st[2]; d = st[3]; e = st[4]; f = st[5]; g = st[6]; h = st[7];
    for (i = 0; i < 64; i++) {
        t1 = h + (ROTR(e, 6) ^ ROTR(e, 11) ^ ROTR(e, 25)) + ((e & f) ^ (~e & g)) + K[i] + w[i];
        t2 = (ROTR(a, 2) ^ ROTR(a, 13) ^ ROTR(a, 22)) + ((a & b) ^ (a & c) ^ (b & c));
        h = g; g = f; f = e; e = d + t1; d = c; c = b; b = a; a = t1 + t2;
    }
    st[0] += a; st[1] += b; st[2] += c; st[3] += d;
    st[4] += e; st[5] += f; st[6] += g; st[7] += h;
}

#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#define HAVE_SHA_NI 1
#include <cpuid.h>
#include <immintrin.h>

/* The same compression with the x86 SHA extensions (the processor maker's instruction
 * set reference, SHA256RNDS2, SHA256MSG1, SHA256MSG2): two rounds per SHA256RNDS2,
 * the message schedule of FIPS 180-4 6.2.2 step 1 four words at a time.  Used only when the processor has them (CPUID leaf 7, EBX bit 29;
 * SSSE3 and SSE4.1); the tests compare both with hashlib. */
__attribute__((target("sha,ssse3,sse4.1")))
static void compress_ni(uint32_t st[8], const unsigned char *p) {
    const __m128i mask = _mm_set_epi64x(0x0c0d0e0f08090a0bULL, 0x0405060700010203ULL);
    __m128i s0, s1, tmp, msg, w[4], abef, cdgh;
    int i;
    tmp = _mm_loadu_si128((const __m128i *)&st[0]);
    s1 = _mm_loadu_si128((const __m128i *)&st[4]);
    tmp = _mm_shuffle_epi32(tmp, 0xB1);      /* CDAB */
    s1 = _mm_shuffle_epi32(s1, 0x1B);        /* EFGH */
    s0 = _mm_alignr_epi8(tmp, s1, 8);        /* ABEF */
    s1 = _mm_blend_epi16(s1, tmp, 0xF0);     /* CDGH */
    abef = s0;
    cdgh = s1;
    for (i = 0; i < 16; i++) {
        __m128i cur;
        if (i < 4) {
            cur = _mm_shuffle_epi8(_mm_loadu_si128((const __m128i *)(p + 16 * i)), mask);
        } else { /* W[t] from W[t-16..t-1], four at a time */
            cur = _mm_sha256msg1_epu32(w[i & 3], w[(i + 1) & 3]);
            cur = _mm_add_epi32(cur, _mm_alignr_epi8(w[(i + 3) & 3], w[(i + 2) & 3], 4));
            cur = _mm_sha256msg2_epu32(cur, w[(i + 3) & 3]);
        }
        w[i & 3] = cur;
        msg = _mm_add_epi32(cur, _mm_loadu_si128((const __m128i *)&K[4 * i]));
        s1 = _mm_sha256rnds2_epu32(s1, s0, msg);
        msg = _mm_shuffle_epi32(msg, 0x0E);
        s0 = _mm_sha256rnds2_epu32(s0, s1, msg);
    }
    s0 = _mm_add_epi32(s0, abef);
    s1 = _mm_add_epi32(s1, cdgh);
    tmp = _mm_shuffle_epi32(s0, 0x1B);       /* FEBA */
    s1 = _mm_shuffle_epi32(s1, 0xB1);        /* DCHG */
    s0 = _mm_blend_epi16(tmp, s1, 0xF0);     /* DCBA */
    s1 = _mm_alignr_epi8(s1, tmp, 8);        /* HGFE */
    _mm_storeu_si128((__m128i *)&st[0], s0);
    _mm_storeu_si128((__m128i *)&st[4], s1);
}

static int cpu_has_sha(void) {
    unsigned a, b, c, d;
    if (!__get_cpuid(1, &a, &b, &c, &d) || !(c & (1u << 9)) || !(c & (1u << 19))) return 0;
    if (__get_cpuid_max(0, NULL) < 7) return 0;
    __cpuid_count(7, 0, a, b, c, d);
    return (b >> 29) & 1;
}
#endif

/* Which compression runs: the SHA extensions when present, else the C above. */
static int use_ni = 0;

static void compress(uint32_t st[8], const unsigned char *p) {
#ifdef HAVE_SHA_NI
    if (use_ni) {
        compress_ni(st, p);
        return;
    }
#endif
    compress_c(st, p);
}

/* The rest of a message after ``done`` bytes already compressed into ``st``: its
 * whole blocks, then the padding of FIPS 180-4 section 5.1.1 (a 1 bit, zeros, the
 * length in bits as 64 bits big-endian); the digest into ``out`` (32 bytes). */
static void finish(uint32_t st[8], uint64_t done, const unsigned char *p, size_t len,
                   unsigned char out[32]) {
    unsigned char tail[128];
    uint64_t bits = (done + (uint64_t)len) * 8u;
    size_t rest, end;
    int i;
    while (len >= 64) {
        compress(st, p);
        p += 64;
        len -= 64;
    }
    rest = len;
    memcpy(tail, p, rest);
    tail[rest] = 0x80;
    end = rest + 1 <= 56 ? 64 : 128;
    memset(tail + rest + 1, 0, end - rest - 1);
    for (i = 0; i < 8; i++) tail[end - 1 - i] = (unsigned char)(bits >> (8 * i));
    compress(st, tail);
    if (end == 128) compress(st, tail + 64);
    for (i = 0; i < 8; i++) {
        out[4 * i] = (unsigned char)(st[i] >> 24);
        out[4 * i + 1] = (unsigned char)(st[i] >> 16);
        out[4 * i + 2] = (unsigned char)(st[i] >> 8);
        out[4 * i + 3] = (unsigned char)st[i];
    }
}

static void sha256(const unsigned char *p, size_t len, unsigned char out[32]) {
    uint32_t st[8];
    memcpy(st, H0, sizeof st);
    finish(st, 0, p, len, out);
}

/* RFC 2104 section 2: the states after the key XOR ipad and the key XOR opad. */
typedef struct {
    uint32_t inner[8], outer[8];
} hmac_key;

static void hmac_init(hmac_key *k, const unsigned char *key, size_t len) {
    unsigned char block[64], pad[64];
    int i;
    memset(block, 0, sizeof block);
    if (len > 64)
        sha256(key, len, block); /* a key longer than a block is hashed first */
    else
        memcpy(block, key, len);
    for (i = 0; i < 64; i++) pad[i] = block[i] ^ 0x36;
    memcpy(k->inner, H0, sizeof H0);
    compress(k->inner, pad);
    for (i = 0; i < 64; i++) pad[i] = block[i] ^ 0x5C;
    memcpy(k->outer, H0, sizeof H0);
    compress(k->outer, pad);
}

static void hmac16_one(const hmac_key *k, const unsigned char *p, size_t len,
                       unsigned char out[16]) {
    uint32_t st[8];
    unsigned char inner[32], full[32];
    memcpy(st, k->inner, sizeof st);
    finish(st, 64, p, len, inner);
    memcpy(st, k->outer, sizeof st);
    finish(st, 64, inner, 32, full);
    memcpy(out, full, 16);
}

/* White space as Python's str.isspace sees it (bidirectional class WS, B or S, or
 * category Zs: the table of Objects/unicodetype_db.h); tests/test_idhash.py checks
 * every code point against Python's own str.strip. */
static int is_space(uint32_t c) {
    if (c <= 0x20) return (c >= 0x09 && c <= 0x0D) || (c >= 0x1C && c <= 0x20);
    if (c < 0x85) return 0;
    return c == 0x85 || c == 0xA0 || c == 0x1680 || (c >= 0x2000 && c <= 0x200A) ||
           c == 0x2028 || c == 0x2029 || c == 0x202F || c == 0x205F || c == 0x3000;
}

/* Empty or only white space; bytes that are not well-formed UTF-8 count as not space. */
static int is_blank(const unsigned char *p, size_t len) {
    size_t i = 0;
    while (i < len) {
        uint32_t c = p[i];
        size_t more;
        if (c < 0x80) {
            if (!is_space(c)) return 0;
            i++;
            continue;
        }
        if ((c & 0xE0) == 0xC0) { more = 1; c &= 0x1F; }
        else if ((c & 0xF0) == 0xE0) { more = 2; c &= 0x0F; }
        else if ((c & 0xF8) == 0xF0) { more = 3; c &= 0x07; }
        else return 0;
        if (i + more >= len) return 0; /* cut short */
        for (size_t j = 1; j <= more; j++) {
            if ((p[i + j] & 0xC0) != 0x80) return 0;
            c = (c << 6) | (p[i + j] & 0x3F);
        }
        if (!is_space(c)) return 0;
        i += more + 1;
    }
    return 1;
}

/* hmac16(key, n, offset, validity or None, offsets, data, wide, out, blank)
 *
 * ``offsets`` are int32 (``wide`` false: Arrow string) or int64 (large string);
 * ``out`` takes 16 * n bytes, ``blank`` n bytes (1 for a missing or blank id).
 * Returns the number of ids hashed. */
static PyObject *hmac16(PyObject *self, PyObject *args) {
    PyObject *okey, *ovalid, *ooffs, *odata, *oout, *oblank;
    Py_ssize_t n, offset, hashed = 0;
    int wide;
    Py_buffer bkey, bvalid, boffs, bdata, bout, bblank;
    int have_valid = 0, ok = 0;
    hmac_key k;
    (void)self;
    if (!PyArg_ParseTuple(args, "OnnOOOpOO", &okey, &n, &offset, &ovalid, &ooffs, &odata,
                          &wide, &oout, &oblank))
        return NULL;
    if (n < 0 || offset < 0) {
        PyErr_SetString(PyExc_ValueError, "negative length or offset");
        return NULL;
    }
    if (PyObject_GetBuffer(okey, &bkey, PyBUF_SIMPLE) < 0) return NULL;
    if (PyObject_GetBuffer(ooffs, &boffs, PyBUF_SIMPLE) < 0) goto fail_key;
    if (PyObject_GetBuffer(odata, &bdata, PyBUF_SIMPLE) < 0) goto fail_offs;
    if (PyObject_GetBuffer(oout, &bout, PyBUF_WRITABLE) < 0) goto fail_data;
    if (PyObject_GetBuffer(oblank, &bblank, PyBUF_WRITABLE) < 0) goto fail_out;
    if (ovalid != Py_None) {
        if (PyObject_GetBuffer(ovalid, &bvalid, PyBUF_SIMPLE) < 0) goto fail_blank;
        have_valid = 1;
    }
    {
        size_t width = wide ? 8 : 4;
        if ((size_t)boffs.len < (size_t)(offset + n + (n > 0 ? 1 : 0)) * width ||
            bout.len < 16 * n || bblank.len < n ||
            (have_valid && bvalid.len * 8 < offset + n)) {
            PyErr_SetString(PyExc_ValueError, "a buffer is shorter than the array");
            goto fail_valid;
        }
        const unsigned char *valid = have_valid ? (const unsigned char *)bvalid.buf : NULL;
        const unsigned char *data = (const unsigned char *)bdata.buf;
        unsigned char *out = (unsigned char *)bout.buf, *blank = (unsigned char *)bblank.buf;
        int bad = 0;
        hmac_init(&k, (const unsigned char *)bkey.buf, (size_t)bkey.len);
        Py_BEGIN_ALLOW_THREADS
        for (Py_ssize_t i = 0; i < n; i++) {
            Py_ssize_t at = offset + i;
            int64_t lo, hi;
            if (valid && !((valid[at >> 3] >> (at & 7)) & 1)) {
                memset(out + 16 * i, 0, 16);
                blank[i] = 1;
                continue;
            }
            if (wide) {
                lo = ((const int64_t *)boffs.buf)[at];
                hi = ((const int64_t *)boffs.buf)[at + 1];
            } else {
                lo = ((const int32_t *)boffs.buf)[at];
                hi = ((const int32_t *)boffs.buf)[at + 1];
            }
            if (lo < 0 || hi < lo || hi > (int64_t)bdata.len) {
                bad = 1;
                break;
            }
            if (is_blank(data + lo, (size_t)(hi - lo))) {
                memset(out + 16 * i, 0, 16);
                blank[i] = 1;
                continue;
            }
            hmac16_one(&k, data + lo, (size_t)(hi - lo), out + 16 * i);
            blank[i] = 0;
            hashed++;
        }
        Py_END_ALLOW_THREADS
        if (bad) {
            PyErr_SetString(PyExc_ValueError, "an offset is outside the data buffer");
            goto fail_valid;
        }
    }
    ok = 1;
fail_valid:
    if (have_valid) PyBuffer_Release(&bvalid);
fail_blank:
    PyBuffer_Release(&bblank);
fail_out:
    PyBuffer_Release(&bout);
fail_data:
    PyBuffer_Release(&bdata);
fail_offs:
    PyBuffer_Release(&boffs);
fail_key:
    PyBuffer_Release(&bkey);
    if (!ok) return NULL;
    return PyLong_FromSsize_t(hashed);
}

/* sha256(data) -> 32 bytes: the hash alone, so that the tests can hold it to the
 * published examples of FIPS 180-4 (the store uses only hmac16). */
static PyObject *sha256_py(PyObject *self, PyObject *arg) {
    Py_buffer b;
    unsigned char out[32];
    (void)self;
    if (PyObject_GetBuffer(arg, &b, PyBUF_SIMPLE) < 0) return NULL;
    Py_BEGIN_ALLOW_THREADS
    sha256((const unsigned char *)b.buf, (size_t)b.len, out);
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&b);
    return PyBytes_FromStringAndSize((const char *)out, 32);
}

/* accelerated([on]) -> whether the SHA extensions are used; ``on`` false forces the
 * portable C (for the tests), true uses the extensions when the processor has them. */
static PyObject *accelerated(PyObject *self, PyObject *args) {
    int on = -1;
    (void)self;
    if (!PyArg_ParseTuple(args, "|p", &on)) return NULL;
#ifdef HAVE_SHA_NI
    if (on >= 0) use_ni = on && cpu_has_sha();
#endif
    return PyBool_FromLong(use_ni);
}

static PyMethodDef methods[] = {
    {"accelerated", accelerated, METH_VARARGS,
     "accelerated([on]) -> whether the x86 SHA extensions are used (on=False: portable C)."},
    {"sha256", sha256_py, METH_O, "sha256(data) -> the 32-byte SHA-256 digest (FIPS 180-4)."},
    {"hmac16", hmac16, METH_VARARGS,
     "hmac16(key, n, offset, validity, offsets, data, wide, out, blank) -> ids hashed: "
     "HMAC-SHA256 (RFC 2104, FIPS 180-4) of each id of an Arrow string array, its first "
     "16 bytes into out; blank[i] = 1 for a missing, empty or white-space id."},
    {NULL, NULL, 0, NULL}};

static struct PyModuleDef module = {
    PyModuleDef_HEAD_INIT, "_idhash",
    "Keyed hashes of patient ids (HMAC-SHA256, truncated to 16 bytes) for the history store.",
    -1, methods, NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__idhash(void) {
#ifdef HAVE_SHA_NI
    use_ni = cpu_has_sha();
#endif
    return PyModule_Create(&module);
}
