/*
 * acidbase._csvfast: the compiled edges around the numpy kernel.
 *
 *   encode        the CSV text of an output table, in one pass over its rows;
 *   scan_numbers  which cells of a text column are plain decimal numbers, and their
 *                 values (the cell reader's fast route, acidbase/inputs/cells.py),
 *                 with blanks, comparators and flags read as its pattern reads them;
 *   distinct_texts  a choice column's cells as indices into its few distinct texts;
 *   pack_rules    the kernel's fired-rule matrix as one 64-bit word per row and 64
 *   group_words   rules, and its distinct patterns (acidbase/results.py, _combine).
 *
 * Edges, not rules: they read, format and pack what Python and the numpy kernel
 * decide, and never decide anything about a panel.  Each has its Python reference
 * kept beside its caller, used when this module is not built, and compared with it
 * by tests/test_csvtext.py and tests/test_compiled_edges.py.  The CSV writer:  The Python writer (acidbase/fileio.py, csv_rows) is the
 * reference; tests/test_csvtext.py asserts the same bytes from both on generated
 * tables.  What it reproduces:
 *   - Arrow's CSV writer with quoting "needed": every non-null text cell in double
 *     quotes with inner quotes doubled, numbers and booleans bare, nulls empty, rows
 *     ending in "\n";
 *   - fileio.format_fixed: a float as fixed-point text with a column's decimals,
 *     rounded as its decimal digits say (ties to even, as Python's format does), no
 *     minus sign on a value that rounds to zero, NaN and infinities empty;
 *   - fileio.escape_formula: a text cell a spreadsheet would run as a formula
 *     (OWASP, "CSV injection") gets a leading apostrophe, unless it is a plain number;
 *   - a dictionary column (a label per row): each label's cell is written once, by
 *     the text kinds above (acidbase/csvtext.py), and copied for every row.
 *
 * Built with the limited API (abi3) and -ffp-contract=off: the rounding test below
 * must be the same IEEE arithmetic numpy does, with no fused multiply-add.
 */
#define Py_LIMITED_API 0x030B0000
#define PY_SSIZE_T_CLEAN
#include <Python.h>

#include <float.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

enum { K_NULL = 0, K_UTF8 = 1, K_LARGE_UTF8 = 2, K_INT64 = 3, K_FIXED = 4, K_BOOL = 5,
       K_LABELS = 6 };

#define MAX_DECIMALS 15
#define FIXED_LIMIT 1e15 /* as fileio._FIXED_LIMIT: integer digits below, printf above */

typedef struct {
    int64_t end;          /* first table row after this chunk */
    int64_t length;
    int64_t offset;       /* the array's offset into its buffers */
    const uint8_t *valid; /* validity bitmap, NULL when every cell is valid */
    const uint8_t *b1;    /* offsets (text) or values */
    const uint8_t *b2;    /* text bytes; K_LABELS: the labels' cells, already written */
    Py_ssize_t n2;        /* size of b2 */
    const int64_t *b3;    /* K_LABELS: where each label's cell starts in b2, and the end */
    int64_t nlabels;      /* K_LABELS: how many labels */
} Chunk;

typedef struct {
    int kind;
    int param; /* decimals (K_FIXED) or escape (text) */
    Py_ssize_t nchunks, cur;
    Chunk *chunks;
} Column;

typedef struct {
    char *p;
    size_t len, cap;
} Out;

static int grow(Out *o, size_t need) {
    if (o->len + need <= o->cap) return 0;
    size_t cap = o->cap ? o->cap : 1 << 16;
    while (cap < o->len + need) cap *= 2;
    char *p = realloc(o->p, cap);
    if (!p) return -1;
    o->p = p;
    o->cap = cap;
    return 0;
}

static const double POW10[MAX_DECIMALS + 1] = {1e0, 1e1, 1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                               1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15};

/* fileio._round_scaled for one value a >= 0: a * 10**d rounded to an integer, where a
 * product landing exactly on a half is settled by the exact product's rounding error
 * (Dekker 1971's error-free product), and only an exact tie goes to even. */
static double round_scaled(double a, double scale) {
    double p = a * scale;
    if (!(p < FIXED_LIMIT)) return p; /* printf's job (below); also infinities */
    /* p in [0, 1e15): adding and taking away 2**52 rounds to an integer, ties to even,
     * exactly as nearbyint in the default rounding mode (no library call) */
    volatile double two52 = 4503599627370496.0;
    double k = (p + two52) - two52;
    double base = k > p ? k - 1.0 : k;
    if (p - base == 0.5) {
        double split = a * 134217729.0; /* 2**27 + 1 */
        double hi = split - (split - a);
        double err = (hi * scale - p) + (a - hi) * scale;
        if (err > 0) k = base + 1.0;
        else if (err < 0) k = base;
    }
    return k;
}

/* A finite x with d decimals; returns the length written (at most 340 bytes). */
static size_t fixed(char *dst, double x, int d) {
    double a = fabs(x);
    double k = round_scaled(a, POW10[d]);
    if (!(k < FIXED_LIMIT)) { /* correctly rounded by the C library, as by Python's format */
        int n = snprintf(dst, 400, "%.*f", d, x);
        for (int i = 0; i < n; i++)
            if (dst[i] != '-' && (dst[i] < '0' || dst[i] > '9')) dst[i] = '.'; /* any locale */
        return (size_t)n;
    }
    uint64_t ki = (uint64_t)k;
    char digits[24];
    int nd = 0;
    do {
        digits[nd++] = (char)('0' + ki % 10);
        ki /= 10;
    } while (ki);
    while (nd < d + 1) digits[nd++] = '0';
    char *q = dst;
    if (x < 0 && k > 0) *q++ = '-';
    for (int j = nd - 1; j >= 0; j--) {
        *q++ = digits[j];
        if (j == d && d > 0) *q++ = '.';
    }
    return (size_t)(q - dst);
}

static inline int is_digit(uint8_t c) { return c >= '0' && c <= '9'; }

/* fileio._PLAIN_NUMBER: ^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$ */
static int plain_number(const uint8_t *s, int64_t n) {
    int64_t i = 0, run;
    if (i < n && (s[i] == '+' || s[i] == '-')) i++;
    for (run = 0; i < n && is_digit(s[i]); i++) run++;
    if (run) {
        if (i < n && (s[i] == '.' || s[i] == ','))
            for (i++; i < n && is_digit(s[i]); i++) {}
    } else {
        if (!(i < n && (s[i] == '.' || s[i] == ','))) return 0;
        for (i++, run = 0; i < n && is_digit(s[i]); i++) run++;
        if (!run) return 0;
    }
    if (i < n && (s[i] == 'e' || s[i] == 'E')) {
        i++;
        if (i < n && (s[i] == '+' || s[i] == '-')) i++;
        for (run = 0; i < n && is_digit(s[i]); i++) run++;
        if (!run) return 0;
    }
    return i == n;
}

/* fileio.escape_danger: the first byte is one a spreadsheet starts a formula with. */
static int formula(const uint8_t *s, int64_t n) {
    if (n == 0) return 0;
    switch (s[0]) {
    case '=': case '+': case '-': case '@': case '\t': case '\r': case '\n': case '\0':
        return !plain_number(s, n);
    default:
        return 0;
    }
}

static inline int bit(const uint8_t *bits, int64_t i) { return (bits[i >> 3] >> (i & 7)) & 1; }

/* Where string cell j of an Arrow string (or, `large`, large_string) column's data
 * starts and ends, from its offsets buffer; -1 when they lie outside `ndata` bytes. */
static inline int span(const void *offs, int large, int64_t j, Py_ssize_t ndata, int64_t *a,
                       int64_t *b) {
    if (large) {
        *a = ((const int64_t *)offs)[j];
        *b = ((const int64_t *)offs)[j + 1];
    } else {
        *a = ((const int32_t *)offs)[j];
        *b = ((const int32_t *)offs)[j + 1];
    }
    return (*a < 0 || *b < *a || *b > (int64_t)ndata) ? -1 : 0;
}

/* One cell of row `row`; -1 on corrupt input, -2 when out of memory. */
static int cell(Out *o, Column *c, int64_t row) {
    while (row >= c->chunks[c->cur].end) c->cur++;
    const Chunk *ch = &c->chunks[c->cur];
    int64_t i = ch->offset + (row - (ch->end - ch->length));
    if (c->kind == K_NULL || (ch->valid && !bit(ch->valid, i))) return 0;
    switch (c->kind) {
    case K_UTF8:
    case K_LARGE_UTF8: {
        int64_t a, b;
        if (c->kind == K_UTF8) {
            a = ((const int32_t *)ch->b1)[i];
            b = ((const int32_t *)ch->b1)[i + 1];
        } else {
            a = ((const int64_t *)ch->b1)[i];
            b = ((const int64_t *)ch->b1)[i + 1];
        }
        if (a < 0 || b < a || b > (int64_t)ch->n2) return -1;
        const uint8_t *s = ch->b2 + a;
        int64_t n = b - a;
        if (grow(o, (size_t)(2 * n + 3))) return -2;
        char *q = o->p + o->len;
        *q++ = '"';
        if (c->param && formula(s, n)) *q++ = '\'';
        /* cells are short: one pass that doubles quotes beats memchr and memcpy calls */
        for (int64_t j = 0; j < n; j++) {
            uint8_t byte = s[j];
            if (byte == '"') *q++ = '"';
            *q++ = (char)byte;
        }
        *q++ = '"';
        o->len = (size_t)(q - o->p);
        return 0;
    }
    case K_INT64: {
        if (grow(o, 24)) return -2;
        int64_t v = ((const int64_t *)ch->b1)[i];
        uint64_t u = v < 0 ? (uint64_t)0 - (uint64_t)v : (uint64_t)v;
        char digits[24];
        int nd = 0;
        do {
            digits[nd++] = (char)('0' + u % 10);
            u /= 10;
        } while (u);
        char *q = o->p + o->len;
        if (v < 0) *q++ = '-';
        while (nd) *q++ = digits[--nd];
        o->len = (size_t)(q - o->p);
        return 0;
    }
    case K_FIXED: {
        double x = ((const double *)ch->b1)[i];
        if (!isfinite(x)) return 0;
        if (grow(o, 400)) return -2;
        char *q = o->p + o->len;
        *q++ = '"';
        q += fixed(q, x, c->param);
        *q++ = '"';
        o->len = (size_t)(q - o->p);
        return 0;
    }
    case K_LABELS: { /* a dictionary column: label k's cell as the text kinds write it */
        int32_t k = ((const int32_t *)ch->b1)[i];
        if (k < 0 || k >= ch->nlabels) return -1;
        int64_t a = ch->b3[k], b = ch->b3[k + 1];
        if (a < 0 || b < a || b > (int64_t)ch->n2) return -1;
        if (grow(o, (size_t)(b - a))) return -2;
        memcpy(o->p + o->len, ch->b2 + a, (size_t)(b - a));
        o->len += (size_t)(b - a);
        return 0;
    }
    case K_BOOL: {
        if (grow(o, 5)) return -2;
        const char *t = bit(ch->b1, i) ? "true" : "false";
        size_t n = strlen(t);
        memcpy(o->p + o->len, t, n);
        o->len += n;
        return 0;
    }
    }
    return -1;
}

/* Sets the Python error for what `cell` returned (-1 corrupt input, -2 no memory). */
static void cell_error(int rc) {
    if (rc == -1) PyErr_SetString(PyExc_ValueError, "a text column's offsets are out of bounds");
    else PyErr_NoMemory();
}

/* Bytes a buffer must hold for `count` cells from `offset`. */
static int64_t need(int kind, int which, int64_t offset, int64_t count) {
    int64_t last = offset + count;
    if (which == 0 || kind == K_BOOL) return (last + 7) / 8; /* a bitmap */
    if (kind == K_UTF8) return 4 * (last + 1);
    if (kind == K_LARGE_UTF8) return 8 * (last + 1);
    if (kind == K_LABELS) return 4 * last; /* int32 indices */
    return 8 * last; /* int64, float64 */
}

typedef struct {
    Py_buffer *views;
    Py_ssize_t nviews, cap;
} Views;

static void release(Views *v) {
    for (Py_ssize_t i = 0; i < v->nviews; i++) PyBuffer_Release(&v->views[i]);
    PyMem_Free(v->views);
}

/* The next free slot of `v` (grown as needed); NULL, with the error set, when out of
 * memory.  The slot counts as used once the caller has filled it (v->nviews++). */
static Py_buffer *next_view(Views *v) {
    if (v->nviews == v->cap) {
        Py_ssize_t cap = v->cap ? 2 * v->cap : 64;
        Py_buffer *p = PyMem_Realloc(v->views, (size_t)cap * sizeof(Py_buffer));
        if (!p) {
            PyErr_NoMemory();
            return NULL;
        }
        v->views = p;
        v->cap = cap;
    }
    return &v->views[v->nviews];
}

/* A buffer object's bytes (NULL for None), checked to hold `size` bytes. */
static int view(Views *v, PyObject *obj, int64_t size, const uint8_t **ptr, Py_ssize_t *len) {
    *ptr = NULL;
    if (len) *len = 0;
    if (obj == Py_None) {
        if (size <= 0) return 0;
        PyErr_SetString(PyExc_ValueError, "a column lacks a buffer its cells need");
        return -1;
    }
    Py_buffer *b = next_view(v);
    if (!b || PyObject_GetBuffer(obj, b, PyBUF_SIMPLE) < 0) return -1;
    v->nviews++;
    if (b->len < size) {
        PyErr_SetString(PyExc_ValueError, "a column's buffer is shorter than its cells need");
        return -1;
    }
    *ptr = b->buf;
    if (len) *len = b->len;
    return 0;
}

static int read_column(Views *v, PyObject *spec, Py_ssize_t nrows, Column *c) {
    PyObject *chunks;
    if (!PyArg_ParseTuple(spec, "iiO", &c->kind, &c->param, &chunks)) return -1;
    if (c->kind < K_NULL || c->kind > K_LABELS || (c->kind == K_FIXED &&
                                                 (c->param < 0 || c->param > MAX_DECIMALS))) {
        PyErr_SetString(PyExc_ValueError, "unknown column kind or decimals");
        return -1;
    }
    Py_ssize_t nch = PyList_Size(chunks);
    if (nch < 0) return -1;
    c->chunks = PyMem_Calloc((size_t)nch + 1, sizeof(Chunk));
    if (!c->chunks) {
        PyErr_NoMemory();
        return -1;
    }
    c->nchunks = nch;
    c->cur = 0;
    int64_t end = 0;
    for (Py_ssize_t k = 0; k < nch; k++) {
        Chunk *ch = &c->chunks[k];
        long long length, offset, nlabels = 0;
        PyObject *bv, *b1, *b2, *b3 = Py_None;
        if (!PyArg_ParseTuple(PyList_GetItem(chunks, k), "LLOOO|LO", &length, &offset, &bv,
                              &b1, &b2, &nlabels, &b3))
            return -1;
        if (length < 0 || offset < 0) {
            PyErr_SetString(PyExc_ValueError, "negative length or offset");
            return -1;
        }
        ch->length = length;
        ch->offset = offset;
        end += length;
        ch->end = end;
        if (bv != Py_None && view(v, bv, need(c->kind, 0, offset, length), &ch->valid, NULL) < 0)
            return -1;
        if (c->kind != K_NULL && length > 0 &&
            view(v, b1, need(c->kind, 1, offset, length), &ch->b1, NULL) < 0)
            return -1;
        if ((c->kind == K_UTF8 || c->kind == K_LARGE_UTF8 || c->kind == K_LABELS) &&
            length > 0 && view(v, b2, 0, &ch->b2, &ch->n2) < 0)
            return -1;
        if (c->kind == K_LABELS && length > 0) {
            const uint8_t *starts;
            if (nlabels < 0) {
                PyErr_SetString(PyExc_ValueError, "a negative number of labels");
                return -1;
            }
            if (view(v, b3, 8 * (nlabels + 1), &starts, NULL) < 0) return -1;
            ch->b3 = (const int64_t *)starts;
            ch->nlabels = nlabels;
        }
    }
    if (end != nrows) {
        PyErr_SetString(PyExc_ValueError, "a column's chunks do not add up to the rows");
        return -1;
    }
    c->chunks[nch].end = INT64_MAX; /* a sentinel: the cursor never runs past it */
    return 0;
}

PyDoc_STRVAR(encode_doc,
             "encode(columns, rows, delimiter) -> bytes\n\n"
             "CSV text (no header) of `rows` rows.  `columns`: a list of (kind, param, "
             "chunks), chunks a list of (length, offset, validity, buffer1, buffer2) "
             "with Arrow's buffers.  Kinds: 0 null, 1 text (param 1: escape formulas), "
             "2 large text, 3 int64, 4 float64 as fixed text (param: decimals), 5 bool, "
             "6 labels (a dictionary column: int32 indices in buffer1, its labels' cells "
             "as written in buffer2, chunks carrying two more items: the number of labels "
             "and an int64 buffer of where each label's cell starts, and the end).");

static PyObject *encode(PyObject *self, PyObject *args) {
    PyObject *specs;
    Py_ssize_t nrows;
    const char *delim;
    Py_ssize_t ndelim;
    if (!PyArg_ParseTuple(args, "Ony#", &specs, &nrows, &delim, &ndelim)) return NULL;
    if (ndelim != 1) {
        PyErr_SetString(PyExc_ValueError, "the delimiter must be one byte");
        return NULL;
    }
    Py_ssize_t ncols = PyList_Size(specs);
    if (ncols < 0) return NULL;
    Views v = {NULL, 0, 0};
    Column *cols = PyMem_Calloc((size_t)ncols + 1, sizeof(Column));
    PyObject *result = NULL;
    Out o = {NULL, 0, 0};
    int rc = 0;
    if (!cols) {
        PyErr_NoMemory();
        goto done;
    }
    for (Py_ssize_t j = 0; j < ncols; j++)
        if (read_column(&v, PyList_GetItem(specs, j), nrows, &cols[j]) < 0) goto done;
    char sep = delim[0];
    Py_BEGIN_ALLOW_THREADS
    for (int64_t r = 0; r < nrows && rc == 0; r++) {
        for (Py_ssize_t j = 0; j < ncols && rc == 0; j++) {
            if (j && (rc = grow(&o, 1)) == 0) o.p[o.len++] = sep;
            if (rc == 0) rc = cell(&o, &cols[j], r);
        }
        if (rc == 0 && ncols && (rc = grow(&o, 1)) == 0) o.p[o.len++] = '\n';
    }
    Py_END_ALLOW_THREADS
    if (rc) {
        cell_error(rc);
        goto done;
    }
    result = PyBytes_FromStringAndSize(o.p ? o.p : "", (Py_ssize_t)o.len);
done:
    free(o.p);
    if (cols)
        for (Py_ssize_t j = 0; j < ncols; j++) PyMem_Free(cols[j].chunks);
    PyMem_Free(cols);
    release(&v);
    return result;
}

PyDoc_STRVAR(cells_doc,
             "cells(column, rows) -> (bytes, starts)\n\n"
             "Each of `rows` cells of one column (as `encode` takes it) as `encode` writes "
             "it, with no delimiter or line end: the bytes of all, and an int64 buffer of "
             "where each cell starts, and the end.");

static PyObject *cells(PyObject *self, PyObject *args) {
    PyObject *spec;
    Py_ssize_t nrows;
    if (!PyArg_ParseTuple(args, "On", &spec, &nrows)) return NULL;
    if (nrows < 0) {
        PyErr_SetString(PyExc_ValueError, "a negative number of rows");
        return NULL;
    }
    Views v = {NULL, 0, 0};
    Column col = {0};
    PyObject *text = NULL, *starts = NULL, *result = NULL;
    Out o = {NULL, 0, 0};
    int64_t *at = PyMem_Malloc(((size_t)nrows + 1) * sizeof(int64_t));
    int rc = 0;
    if (!at) {
        PyErr_NoMemory();
        goto done;
    }
    if (read_column(&v, spec, nrows, &col) < 0) goto done;
    for (int64_t r = 0; r < nrows && rc == 0; r++) {
        at[r] = (int64_t)o.len;
        rc = cell(&o, &col, r);
    }
    at[nrows] = (int64_t)o.len;
    if (rc) {
        cell_error(rc);
        goto done;
    }
    text = PyBytes_FromStringAndSize(o.p ? o.p : "", (Py_ssize_t)o.len);
    starts = PyBytes_FromStringAndSize((const char *)at, (Py_ssize_t)((nrows + 1) * 8));
    if (text && starts) result = PyTuple_Pack(2, text, starts);
done:
    Py_XDECREF(text);
    Py_XDECREF(starts);
    free(o.p);
    PyMem_Free(col.chunks);
    PyMem_Free(at);
    release(&v);
    return result;
}

/* A writable buffer object's bytes, checked to hold `size` bytes. */
static int wview(Views *v, PyObject *obj, int64_t size, uint8_t **ptr) {
    *ptr = NULL;
    Py_buffer *b = next_view(v);
    if (!b || PyObject_GetBuffer(obj, b, PyBUF_WRITABLE) < 0) return -1;
    v->nviews++;
    if (b->len < size) {
        PyErr_SetString(PyExc_ValueError, "an output buffer is shorter than its cells need");
        return -1;
    }
    *ptr = b->buf;
    return 0;
}

/* ---------------------------------------------------------------------------
 * scan_numbers: the cell reader's fast route (acidbase/inputs/cells.py,
 * parse_numeric_many, whose Python code is the reference).
 *
 * A cell is "plain" when it is not empty, holds only the bytes 0-9 and '.', with at
 * most one point and at least one digit, and reads as a finite number: exactly the
 * cells that pass the Python route's quick test (digits and points only, not empty)
 * and that Arrow's cast then reads as finite ("." and "1.2.3" pass the quick test but
 * not the cast; hundreds of digits read as infinity).
 *
 * With an output for marks, the scan also reads the ordinary cells that are not plain,
 * exactly as the reader's pattern (cells._VALUE after the trim) reads them:
 *   - a blank cell (empty, or spaces and tabs only): not measured;
 *   - a number of that shape (the decimal mark being the file's, '.' or ','), with
 *     spaces or tabs around it, a comparator before it (< <= > >=, FHIR
 *     Quantity.comparator) and a laboratory flag after it (cells.LAB_FLAGS, HL7 v2
 *     table 0078, and '*'): the value, NaN when censored, the comparator and flag as
 *     codes (marks: bits 0-2 the comparator, 1 "<" 2 "<=" 3 ">" 4 ">="; bits 3-6 the
 *     flag, 1 + its index in FLAG_TOKENS; bit 7 "not plain": the column is then not
 *     read whole by the first cast).
 * Spaces and tabs are the only blanks taken: both are trimmed by the Python route's
 * utf8_trim_whitespace and matched by its pattern's \s.  With a decimal comma no
 * cell is plain (the Python route never marks such a column plain), and a point is
 * never read (the Python route refuses it).  Anything else (a sign, an exponent,
 * another blank, a word, another script's digits, a number beyond the double range)
 * goes to the Python pattern: this code decides no refusal.
 *
 * The value must be the correctly rounded double of the decimal, bit for bit what
 * Arrow's cast gives:
 *   - significant digits forming an integer m <= 2**53, with k <= 22 digits after the
 *     point: m and 10**k are exact doubles (10**22 = 2**22 * 5**22, 5**22 < 2**53), so
 *     m / 10**k is one IEEE division, correctly rounded (Clinger, "How to read floating
 *     point numbers accurately", PLDI 1990: the exact fast path).  m is summed as an
 *     integer, exactly.  This needs double arithmetic without extended precision
 *     (FLT_EVAL_METHOD 0, every SSE2 and ARM64 build); elsewhere no cell takes it;
 *   - any other cell: the C library's strtod on a NUL-terminated copy of its digits
 *     without the point, followed by "e-k".  With no decimal point in the copy, no
 *     locale can change the reading.  glibc's strtod is correctly rounded for any
 *     number of digits.
 * tests/test_compiled_edges.py compares values and results bit for bit with the
 * Python route on generated cells.
 */
#if defined(FLT_EVAL_METHOD) && FLT_EVAL_METHOD == 0
#define EXACT_DIVISION 1
#else
#define EXACT_DIVISION 0
#endif

static const double P10[23] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                               1e8,  1e9,  1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
                               1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};

/* 1: plain, its value in *out; 0: not plain; -2: out of memory. */
static int plain_decimal(const uint8_t *s, int64_t n, uint8_t mark, double *out) {
    int64_t point = -1, digits = 0, sig = 0;
    uint64_t m = 0;
    if (EXACT_DIVISION && n <= 19) { /* the usual cell: every digit fits one integer */
        for (int64_t i = 0; i < n; i++) {
            unsigned d = (unsigned)s[i] - '0';
            if (d < 10) m = m * 10 + d;
            else if (s[i] == mark && point < 0) point = i;
            else return 0;
        }
        /* at most 19 digits: m < 10**19 < 2**64, exact; leading zeros add nothing */
        int64_t k = point < 0 ? 0 : n - 1 - point;
        if (n - (point >= 0) == 0) return 0; /* no digit (also the empty cell) */
        if (m <= 9007199254740992ULL) { /* k <= 18 here */
            *out = (double)(int64_t)m / P10[k]; /* m <= 2**53: a signed conversion, exact */
            return 1;
        }
        m = 0;
        point = -1; /* beyond 2**53: the general reading below */
    }
    for (int64_t i = 0; i < n; i++) {
        uint8_t c = s[i];
        if (is_digit(c)) {
            digits++;
            if ((sig || c != '0') && ++sig <= 19) m = m * 10 + (uint64_t)(c - '0');
        } else if (c == mark && point < 0) {
            point = i;
        } else {
            return 0;
        }
    }
    if (!digits) return 0; /* also the empty cell */
    int64_t k = point < 0 ? 0 : n - 1 - point;
    double v;
    if (EXACT_DIVISION && sig <= 19 && m <= 9007199254740992ULL && k <= 22) {
        v = (double)m / P10[k];
    } else {
        char small[128];
        size_t size = (size_t)n + 32;
        char *buf = size <= sizeof small ? small : malloc(size);
        if (!buf) return -2;
        size_t j = 0;
        for (int64_t i = 0; i < n; i++)
            if (s[i] != mark) buf[j++] = (char)s[i];
        if (k) j += (size_t)snprintf(buf + j, 32, "e-%lld", (long long)k);
        buf[j] = '\0';
        v = strtod(buf, NULL);
        if (buf != small) free(buf);
    }
    if (!isfinite(v)) return 0;
    *out = v;
    return 1;
}

static double quiet_nan(void) { /* numpy's and Arrow's NaN, 0x7ff8000000000000 */
    uint64_t u = 0x7ff8000000000000ULL;
    double d;
    memcpy(&d, &u, sizeof d);
    return d;
}

/* cells.LAB_FLAGS, in its order: a flag's code is 1 + its index. */
static const char *const FLAG_TOKENS[8] = {"LL", "HH", "AA", "L", "H", "A", "N", "*"};
#define NOT_PLAIN 0x80

static inline int blank(uint8_t c) { return c == ' ' || c == '\t'; }

/* One valid cell with marks read (see above).  1: read, value in *out and marks in *m;
 * 0: left to the Python pattern; -2: out of memory. */
static int read_cell(const uint8_t *s, int64_t n, uint8_t mark, double *out, uint8_t *m) {
    int64_t a = 0, b = n;
    if (n && (is_digit(s[0]) || s[0] == mark)) { /* the usual cell, a plain number: one pass */
        int got = plain_decimal(s, n, mark, out);
        if (got) {
            *m = got > 0 && mark != '.' ? NOT_PLAIN : 0;
            return got;
        }
    }
    while (a < b && blank(s[a])) a++;
    while (b > a && blank(s[b - 1])) b--;
    if (a == b) { /* blank: not measured */
        *out = quiet_nan();
        *m = NOT_PLAIN;
        return 1;
    }
    uint8_t cmp = 0, flag = 0;
    if (s[a] == '<' || s[a] == '>') {
        int eq = a + 1 < b && s[a + 1] == '=';
        cmp = (uint8_t)((s[a] == '<' ? 1 : 3) + eq);
        for (a += 1 + eq; a < b && blank(s[a]); a++) {}
    }
    int64_t e = a;
    while (e < b && (is_digit(s[e]) || s[e] == mark)) e++;
    if (e == a) return 0;
    int64_t f = e;
    while (f < b && blank(s[f])) f++;
    if (f < b) {
        for (int k = 0; k < 8 && !flag; k++) {
            size_t len = strlen(FLAG_TOKENS[k]);
            if ((size_t)(b - f) == len && memcmp(s + f, FLAG_TOKENS[k], len) == 0)
                flag = (uint8_t)(k + 1);
        }
        if (!flag) return 0;
    }
    double v;
    int got = plain_decimal(s + a, e - a, mark, &v);
    if (got <= 0) return got;
    /* not plain: a plain cell was read above (this one has a blank, a mark or a comma) */
    *out = cmp ? quiet_nan() : v;
    *m = (uint8_t)(NOT_PLAIN | cmp | flag << 3);
    return 1;
}

PyDoc_STRVAR(scan_doc,
             "scan_numbers(length, offset, validity, offsets, data, large, values, rest"
             "[, mark, marks]) -> int or (int, int, int)\n\n"
             "Reads a text column (Arrow's buffers; `large`: 64-bit offsets) into `values` "
             "(float64, NaN where not read) and `rest` (uint8, 1 for a valid cell left to "
             "the Python pattern).  Without `marks`: only plain decimal numbers are read, "
             "and the count of the rest is returned.  With `marks` (uint8, written whole) "
             "and `mark` (the decimal mark's byte): blank cells, spaces, comparators and "
             "flags are read too, and (rest, not plain, with a comparator or flag) counts "
             "are returned.");

static PyObject *scan_numbers(PyObject *self, PyObject *args) {
    long long length, offset;
    int large, mark = '.';
    PyObject *bv, *bo, *bd, *bvals, *brest, *bmarks = Py_None;
    if (!PyArg_ParseTuple(args, "LLOOOpOO|iO", &length, &offset, &bv, &bo, &bd, &large, &bvals,
                          &brest, &mark, &bmarks))
        return NULL;
    if (length < 0 || offset < 0) {
        PyErr_SetString(PyExc_ValueError, "negative length or offset");
        return NULL;
    }
    if (mark != '.' && mark != ',') {
        PyErr_SetString(PyExc_ValueError, "the decimal mark is '.' or ','");
        return NULL;
    }
    Views v = {NULL, 0, 0};
    PyObject *result = NULL;
    const uint8_t *valid = NULL, *offs = NULL, *data = NULL;
    uint8_t *vals = NULL, *rest = NULL, *marks = NULL;
    Py_ssize_t ndata = 0;
    if (bv != Py_None && view(&v, bv, (offset + length + 7) / 8, &valid, NULL) < 0) goto done;
    if (length > 0 && view(&v, bo, (large ? 8 : 4) * (offset + length + 1), &offs, NULL) < 0)
        goto done;
    if (length > 0 && view(&v, bd, 0, &data, &ndata) < 0) goto done;
    if (wview(&v, bvals, 8 * length, &vals) < 0 || wview(&v, brest, length, &rest) < 0)
        goto done;
    if (bmarks != Py_None && wview(&v, bmarks, length, &marks) < 0) goto done;
    int rc = 0;
    int64_t count = 0, not_plain = 0, marked = 0;
    Py_BEGIN_ALLOW_THREADS
    const double none = quiet_nan();
    for (int64_t i = 0; i < length; i++) {
        int64_t j = offset + i;
        double x = none;
        uint8_t r = 0, m = 0;
        if (!valid || bit(valid, j)) {
            int64_t a, b;
            if (span(offs, large, j, ndata, &a, &b)) {
                rc = -1;
                break;
            }
            int got;
            if (marks)
                got = read_cell(data + a, b - a, (uint8_t)mark, &x, &m);
            else
                got = b > a ? plain_decimal(data + a, b - a, '.', &x) : 0;
            if (got < 0) {
                rc = -2;
                break;
            }
            if (!got) {
                x = none;
                m = 0;
                r = 1;
                count++;
            } else if (m) {
                not_plain += (m & NOT_PLAIN) != 0;
                marked += (m & 0x7f) != 0;
            }
        }
        memcpy(vals + 8 * i, &x, sizeof x);
        rest[i] = r;
        if (marks) marks[i] = m;
    }
    Py_END_ALLOW_THREADS
    if (rc == -1)
        PyErr_SetString(PyExc_ValueError, "a text column's offsets are out of bounds");
    else if (rc)
        PyErr_NoMemory();
    else if (marks)
        result = Py_BuildValue("LLL", (long long)count, (long long)not_plain,
                               (long long)marked);
    else
        result = PyLong_FromLongLong(count);
done:
    release(&v);
    return result;
}

/* ---------------------------------------------------------------------------
 * distinct_texts: a choice column's cells as indices into its distinct texts (in the
 * order of their first cell), for the cell reader's choice route (acidbase/inputs/
 * cells.py, _choices_of_text, whose Arrow dictionary encoding is the reference).  A
 * choice column holds a few spellings: each cell is compared with the last one's
 * text, then with the few seen; beyond `limit` distinct texts the scan gives up (None)
 * and Arrow's hash encoding reads the column.  It reads bytes only: what a text means
 * is decided in Python, once per distinct text.
 */
PyDoc_STRVAR(distinct_doc,
             "distinct_texts(length, offset, validity, offsets, data, large, indices, limit) "
             "-> list[bytes] | None\n\n"
             "Writes each cell's index into the returned distinct texts to `indices` "
             "(int32, -1 for a null cell); None when there are more than `limit`.");

static PyObject *distinct_texts(PyObject *self, PyObject *args) {
    long long length, offset;
    int large, limit;
    PyObject *bv, *bo, *bd, *bidx;
    if (!PyArg_ParseTuple(args, "LLOOOpOi", &length, &offset, &bv, &bo, &bd, &large, &bidx,
                          &limit))
        return NULL;
    if (length < 0 || offset < 0 || limit < 1 || limit > 4096) {
        PyErr_SetString(PyExc_ValueError, "negative length or offset, or a limit beyond 4096");
        return NULL;
    }
    Views v = {NULL, 0, 0};
    PyObject *result = NULL;
    const uint8_t *valid = NULL, *offs = NULL, *data = NULL;
    uint8_t *out = NULL;
    Py_ssize_t ndata = 0;
    int64_t *starts = NULL, *ends = NULL;
    int nd = 0, rc = 0;
    if (bv != Py_None && view(&v, bv, (offset + length + 7) / 8, &valid, NULL) < 0) goto done;
    if (length > 0 && view(&v, bo, (large ? 8 : 4) * (offset + length + 1), &offs, NULL) < 0)
        goto done;
    if (length > 0 && view(&v, bd, 0, &data, &ndata) < 0) goto done;
    if (wview(&v, bidx, 4 * length, &out) < 0) goto done;
    starts = malloc(sizeof(int64_t) * (size_t)limit);
    ends = malloc(sizeof(int64_t) * (size_t)limit);
    if (!starts || !ends) {
        PyErr_NoMemory();
        goto done;
    }
    Py_BEGIN_ALLOW_THREADS
    int32_t *idx = (int32_t *)out;
    int last = -1;
    for (int64_t i = 0; i < length; i++) {
        int64_t j = offset + i;
        if (valid && !bit(valid, j)) {
            idx[i] = -1;
            continue;
        }
        int64_t a, b;
        if (span(offs, large, j, ndata, &a, &b)) {
            rc = -1;
            break;
        }
        int k = -1;
        if (last >= 0 && ends[last] - starts[last] == b - a &&
            memcmp(data + starts[last], data + a, (size_t)(b - a)) == 0)
            k = last;
        for (int t = 0; k < 0 && t < nd; t++)
            if (ends[t] - starts[t] == b - a && memcmp(data + starts[t], data + a, (size_t)(b - a)) == 0)
                k = t;
        if (k < 0) {
            if (nd == limit) {
                rc = 1;
                break;
            }
            starts[nd] = a;
            ends[nd] = b;
            k = nd++;
        }
        idx[i] = k;
        last = k;
    }
    Py_END_ALLOW_THREADS
    if (rc == -1) {
        PyErr_SetString(PyExc_ValueError, "a text column's offsets are out of bounds");
        goto done;
    }
    if (rc == 1) {
        result = Py_NewRef(Py_None);
        goto done;
    }
    result = PyList_New(nd);
    for (int t = 0; result && t < nd; t++) {
        PyObject *b = PyBytes_FromStringAndSize((const char *)data + starts[t],
                                                (Py_ssize_t)(ends[t] - starts[t]));
        if (!b) {
            Py_CLEAR(result);
            break;
        }
        PyList_SetItem(result, t, b);
    }
done:
    free(starts);
    free(ends);
    release(&v);
    return result;
}

/* ---------------------------------------------------------------------------
 * pack_rules and group_words: acidbase/results.py, _combine (whose numpy code is the
 * reference).  The kernel's fired matrix (rules x rows, one byte a cell) becomes
 * words[row * k + r / 64] bit r % 64 = rule r, k = ceil(rules / 64); then, for one
 * word a row, the distinct words in increasing order (as numpy.unique), the first
 * row of each, and each row's index into them.
 */
PyDoc_STRVAR(pack_doc,
             "pack_rules(mask, rules, rows, words) -> None\n\n"
             "`mask`: rules x rows bytes (C order, nonzero = fired); `words`: rows x "
             "ceil(rules / 64) uint64, written whole.");

static PyObject *pack_rules(PyObject *self, PyObject *args) {
    PyObject *bm, *bw;
    Py_ssize_t rules, rows;
    if (!PyArg_ParseTuple(args, "OnnO", &bm, &rules, &rows, &bw)) return NULL;
    if (rules < 0 || rows < 0) {
        PyErr_SetString(PyExc_ValueError, "negative shape");
        return NULL;
    }
    Views v = {NULL, 0, 0};
    const uint8_t *mask = NULL;
    uint8_t *out = NULL;
    int64_t k = ((int64_t)rules + 63) / 64;
    if (view(&v, bm, (int64_t)rules * rows, &mask, NULL) < 0 ||
        wview(&v, bw, 8 * k * (int64_t)rows, &out) < 0) {
        release(&v);
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    uint64_t *words = (uint64_t *)out;
    if (rows && k) memset(words, 0, (size_t)(8 * k * rows));
    /* A block of rows at a time, so its words stay in the fastest cache; eight rules
     * (one byte of a word) at a time, so each word is read and written once for them. */
    for (Py_ssize_t i0 = 0; i0 < rows; i0 += 1024) {
        Py_ssize_t i1 = rows - i0 < 1024 ? rows : i0 + 1024;
        Py_ssize_t r = 0;
        for (; r + 8 <= rules; r += 8) { /* r % 8 == 0: the eight share a word */
            const uint8_t *m = mask + (int64_t)r * rows;
            uint64_t *w = words + r / 64;
            int shift = (int)(r % 64);
            for (Py_ssize_t i = i0; i < i1; i++) {
                uint64_t byte = (uint64_t)(m[i] != 0) | (uint64_t)(m[i + rows] != 0) << 1 |
                                (uint64_t)(m[i + 2 * rows] != 0) << 2 |
                                (uint64_t)(m[i + 3 * rows] != 0) << 3 |
                                (uint64_t)(m[i + 4 * rows] != 0) << 4 |
                                (uint64_t)(m[i + 5 * rows] != 0) << 5 |
                                (uint64_t)(m[i + 6 * rows] != 0) << 6 |
                                (uint64_t)(m[i + 7 * rows] != 0) << 7;
                w[i * k] |= byte << shift;
            }
        }
        for (; r < rules; r++) {
            const uint8_t *m = mask + (int64_t)r * rows;
            uint64_t *w = words + r / 64;
            int shift = (int)(r % 64);
            for (Py_ssize_t i = i0; i < i1; i++) w[i * k] |= (uint64_t)(m[i] != 0) << shift;
        }
    }
    Py_END_ALLOW_THREADS
    release(&v);
    Py_RETURN_NONE;
}

typedef struct {
    uint64_t key;
    int64_t group;
} Pair;

static int by_key(const void *a, const void *b) {
    uint64_t x = ((const Pair *)a)->key, y = ((const Pair *)b)->key;
    return (x > y) - (x < y);
}

/* Distinct keys of words[0:n]: group ids by first appearance in inverse[], keys and
 * first rows in gkey/gfirst; returns the number of groups, -1 when out of memory. */
static int64_t find_groups(const uint64_t *words, int64_t n, int32_t *inverse, uint64_t **gkey,
                           int64_t **gfirst) {
    int64_t cap = 256, ngroups = 0, room = 64;
    int32_t *slots = malloc((size_t)cap * sizeof *slots);
    uint64_t *keys = malloc((size_t)room * sizeof *keys);
    int64_t *first = malloc((size_t)room * sizeof *first);
    if (!slots || !keys || !first) goto fail;
    memset(slots, 0xff, (size_t)cap * sizeof *slots);
    for (int64_t i = 0; i < n; i++) {
        uint64_t key = words[i];
        uint64_t h = (key * 0x9E3779B97F4A7C15ULL) >> 17;
        int64_t s = (int64_t)(h & (uint64_t)(cap - 1));
        while (slots[s] >= 0 && keys[slots[s]] != key) s = (s + 1) & (cap - 1);
        if (slots[s] < 0) {
            if (ngroups == room) {
                room *= 2;
                uint64_t *k2 = realloc(keys, (size_t)room * sizeof *keys);
                if (!k2) goto fail;
                keys = k2;
                int64_t *f2 = realloc(first, (size_t)room * sizeof *first);
                if (!f2) goto fail;
                first = f2;
            }
            keys[ngroups] = key;
            first[ngroups] = i;
            slots[s] = (int32_t)ngroups++;
            if (2 * ngroups > cap) { /* half full: twice the slots, every key placed again */
                free(slots);
                cap *= 2;
                slots = malloc((size_t)cap * sizeof *slots);
                if (!slots) goto fail;
                memset(slots, 0xff, (size_t)cap * sizeof *slots);
                for (int64_t g = 0; g < ngroups; g++) {
                    uint64_t hg = (keys[g] * 0x9E3779B97F4A7C15ULL) >> 17;
                    int64_t t = (int64_t)(hg & (uint64_t)(cap - 1));
                    while (slots[t] >= 0) t = (t + 1) & (cap - 1);
                    slots[t] = (int32_t)g;
                }
                s = -1;
            }
            inverse[i] = (int32_t)(ngroups - 1);
        } else {
            inverse[i] = slots[s];
        }
    }
    free(slots);
    *gkey = keys;
    *gfirst = first;
    return ngroups;
fail:
    free(slots);
    free(keys);
    free(first);
    return -1;
}

PyDoc_STRVAR(group_doc,
             "group_words(words, rows, inverse) -> (keys, first)\n\n"
             "`words`: rows uint64; `inverse`: rows int32, written with each row's index "
             "into `keys` (the distinct words, increasing); `first`: each key's first row.");

static PyObject *group_words(PyObject *self, PyObject *args) {
    PyObject *bw, *binv;
    Py_ssize_t rows;
    if (!PyArg_ParseTuple(args, "OnO", &bw, &rows, &binv)) return NULL;
    if (rows < 0 || rows > INT32_MAX) {
        PyErr_SetString(PyExc_ValueError, "rows out of range");
        return NULL;
    }
    Views v = {NULL, 0, 0};
    const uint8_t *wbytes = NULL;
    uint8_t *ibytes = NULL;
    if (view(&v, bw, 8 * (int64_t)rows, &wbytes, NULL) < 0 ||
        wview(&v, binv, 4 * (int64_t)rows, &ibytes) < 0) {
        release(&v);
        return NULL;
    }
    const uint64_t *words = (const uint64_t *)wbytes;
    int32_t *inverse = (int32_t *)ibytes;
    uint64_t *gkey = NULL;
    int64_t *gfirst = NULL;
    Pair *order = NULL;
    int64_t *rank = NULL;
    int64_t ngroups;
    Py_BEGIN_ALLOW_THREADS
    ngroups = find_groups(words, rows, inverse, &gkey, &gfirst);
    if (ngroups >= 0) {
        order = malloc((size_t)(ngroups + 1) * sizeof *order);
        rank = malloc((size_t)(ngroups + 1) * sizeof *rank);
        if (order && rank) {
            for (int64_t g = 0; g < ngroups; g++) {
                order[g].key = gkey[g];
                order[g].group = g;
            }
            qsort(order, (size_t)ngroups, sizeof *order, by_key);
            for (int64_t j = 0; j < ngroups; j++) rank[order[j].group] = j;
            for (int64_t i = 0; i < rows; i++) inverse[i] = (int32_t)rank[inverse[i]];
        } else {
            ngroups = -1;
        }
    }
    Py_END_ALLOW_THREADS
    PyObject *keys = NULL, *first = NULL, *result = NULL;
    if (ngroups < 0) {
        PyErr_NoMemory();
        goto done;
    }
    keys = PyList_New((Py_ssize_t)ngroups);
    first = PyList_New((Py_ssize_t)ngroups);
    if (!keys || !first) goto done;
    for (int64_t j = 0; j < ngroups; j++) {
        PyObject *kj = PyLong_FromUnsignedLongLong(order[j].key);
        PyObject *fj = PyLong_FromLongLong(gfirst[order[j].group]);
        if (!kj || !fj) {
            Py_XDECREF(kj);
            Py_XDECREF(fj);
            goto done;
        }
        PyList_SetItem(keys, (Py_ssize_t)j, kj);
        PyList_SetItem(first, (Py_ssize_t)j, fj);
    }
    result = PyTuple_Pack(2, keys, first);
done:
    Py_XDECREF(keys);
    Py_XDECREF(first);
    free(gkey);
    free(gfirst);
    free(order);
    free(rank);
    release(&v);
    return result;
}

static PyMethodDef methods[] = {
    {"encode", encode, METH_VARARGS, encode_doc},
    {"cells", cells, METH_VARARGS, cells_doc},
    {"scan_numbers", scan_numbers, METH_VARARGS, scan_doc},
    {"distinct_texts", distinct_texts, METH_VARARGS, distinct_doc},
    {"pack_rules", pack_rules, METH_VARARGS, pack_doc},
    {"group_words", group_words, METH_VARARGS, group_doc},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef module = {
    PyModuleDef_HEAD_INIT, "_csvfast",
    "Compiled edges: CSV text, plain-number cells, fired-rule packing (acidbase.csvtext).",
    -1,
    methods,
};

PyMODINIT_FUNC PyInit__csvfast(void) { return PyModule_Create(&module); }
