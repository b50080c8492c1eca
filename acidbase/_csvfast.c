/*
 * acidbase._csvfast: the CSV text of an output table, in one pass over its rows.
 *
 * An edge, not a rule: it formats what the numpy kernel computed and never decides
 * anything about a panel.  The Python writer (acidbase/fileio.py, csv_rows) is the
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

/* A buffer object's bytes (NULL for None), checked to hold `size` bytes. */
static int view(Views *v, PyObject *obj, int64_t size, const uint8_t **ptr, Py_ssize_t *len) {
    *ptr = NULL;
    if (len) *len = 0;
    if (obj == Py_None) {
        if (size <= 0) return 0;
        PyErr_SetString(PyExc_ValueError, "a column lacks a buffer its cells need");
        return -1;
    }
    if (v->nviews == v->cap) {
        Py_ssize_t cap = v->cap ? 2 * v->cap : 64;
        Py_buffer *p = PyMem_Realloc(v->views, (size_t)cap * sizeof(Py_buffer));
        if (!p) {
            PyErr_NoMemory();
            return -1;
        }
        v->views = p;
        v->cap = cap;
    }
    Py_buffer *b = &v->views[v->nviews];
    if (PyObject_GetBuffer(obj, b, PyBUF_SIMPLE) < 0) return -1;
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
    if (rc == -1) {
        PyErr_SetString(PyExc_ValueError, "a text column's offsets are out of bounds");
        goto done;
    }
    if (rc) {
        PyErr_NoMemory();
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
    if (rc == -1) {
        PyErr_SetString(PyExc_ValueError, "a text column's offsets are out of bounds");
        goto done;
    }
    if (rc) {
        PyErr_NoMemory();
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

static PyMethodDef methods[] = {
    {"encode", encode, METH_VARARGS, encode_doc},
    {"cells", cells, METH_VARARGS, cells_doc},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef module = {
    PyModuleDef_HEAD_INIT, "_csvfast",
    "The CSV text of an output table (compiled; acidbase.csvtext is the reference).", -1,
    methods,
};

PyMODINIT_FUNC PyInit__csvfast(void) { return PyModule_Create(&module); }
