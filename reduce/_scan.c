/*
 * Fast path of the text-record reader (reduce/records.py): plain numeric
 * delimited text parsed straight into float64 columns.
 *
 * Only what is certain is taken.  A field becomes a number here only when its
 * decimal value converts exactly by one IEEE 754 operation: at most 19
 * significant digits whose integer m is at most 2**53, and a decimal exponent
 * e with |e| <= 22, so that m and 10**|e| are both exact doubles and the one
 * multiplication or division rounds correctly (Clinger's fast path: W. D.
 * Clinger, "How to read floating point numbers accurately", PLDI 1990).  The
 * result is then the correctly rounded value, the same as Python's float() of
 * the text.  Anything else -- an empty or text cell, NaN, a quote, a blank or
 * short or long line, a bare carriage return, a number outside the fast
 * path -- stops the scan, and the reader parses the file with pandas, which
 * handles and reports every such case.  So this code never decides what a
 * doubtful cell means.
 *
 * The loops run without the GIL, so the reader can scan two halves of a
 * long record in two threads.  Every read is bounded by the range given; the
 * output buffer is checked for size before anything is written.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <float.h>
#include <stdint.h>
#include <string.h>

/* Exact powers of ten as doubles (10**0 .. 10**22 are exactly representable). */
static const double POW10[23] = {
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
    1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};

#define MAX_FIELDS 256
#define TWO_TO_53 9007199254740992ULL

/* Blanks around a field: spaces, and tabs unless the tab is the delimiter. */
static int is_blank(char c, char sep) { return c == ' ' || (c == '\t' && sep != '\t'); }

/* Digits from *pp appended to *m (wrapping beyond 19 digits: the caller
 * refuses those); returns how many. */
static Py_ssize_t digit_run(const char **pp, const char *end, uint64_t *m)
{
    const char *p = *pp, *from = *pp;
    uint64_t v = *m;
    while (p < end && (unsigned char)(*p - '0') < 10)
        v = v * 10 + (uint64_t)(*p++ - '0');
    *pp = p;
    *m = v;
    return p - from;
}

/*
 * One number starting at *pp (leading blanks already skipped); on success
 * stores it in *out, moves *pp past it and returns 1; returns 0 when the text
 * is not a number this fast path converts exactly.
 */
static int scan_number(const char **pp, const char *end, char decimal, double *out)
{
    const char *p = *pp, *first;
    int negative = 0;
    Py_ssize_t n_digits, n_frac = 0;
    uint64_t m = 0;
    long e10;

    if (p < end && (*p == '+' || *p == '-')) {
        negative = (*p == '-');
        p++;
    }
    first = p;
    while (p < end && *p == '0')
        p++; /* leading zeros: not significant */
    n_digits = digit_run(&p, end, &m);
    if (p < end && *p == decimal) {
        const char *frac = ++p;
        if (n_digits == 0) { /* zeros after the point and before the first digit */
            while (p < end && *p == '0')
                p++;
        }
        n_digits += digit_run(&p, end, &m);
        n_frac = p - frac;
    }
    if (p == first || (p == first + 1 && *first == decimal))
        return 0; /* no digit at all */
    if (n_digits > 19)
        return 0; /* more significant digits than the fast path holds */
    e10 = -(long)n_frac;
    if (p < end && (*p == 'e' || *p == 'E')) {
        int eneg = 0;
        long ev = 0;
        const char *exp_digits;
        p++;
        if (p < end && (*p == '+' || *p == '-')) {
            eneg = (*p == '-');
            p++;
        }
        exp_digits = p;
        for (; p < end && (unsigned char)(*p - '0') < 10; p++)
            if (ev < 100000)
                ev = ev * 10 + (*p - '0');
        if (p == exp_digits)
            return 0;
        e10 += eneg ? -ev : ev;
    }
    if (m == 0) {
        *out = negative ? -0.0 : 0.0;
    } else {
        double v;
        if (m > TWO_TO_53 || e10 < -22 || e10 > 22)
            return 0;
        v = (double)m;
        v = e10 < 0 ? v / POW10[-e10] : v * POW10[e10];
        *out = negative ? -v : v;
    }
    *pp = p;
    return 1;
}

/* Status of a scan: rows done, or where and why it stopped. */
typedef struct {
    Py_ssize_t rows;
    Py_ssize_t stop; /* byte offset of the first field not taken, or -1 */
} scan_result;

/*
 * Rows of [begin, end) into out[slot[f] * capacity + row0 + r] for the fields
 * f with slot[f] >= 0.  sep is the delimiter, ' ' meaning runs of blanks.
 * The range holds whole lines; the last one may lack its line feed.
 */
static scan_result scan_rows(const char *buf, Py_ssize_t begin, Py_ssize_t end, char sep,
                             char decimal, int n_fields, const int *slot, double *out,
                             Py_ssize_t capacity, Py_ssize_t row0)
{
    scan_result res = {0, -1};
    const char *p = buf + begin, *stop = buf + end;
    Py_ssize_t row = row0;

    while (p < stop) {
        int f;
        if (row >= capacity) {
            res.stop = p - buf;
            return res;
        }
        for (f = 0; f < n_fields; f++) {
            while (p < stop && is_blank(*p, sep))
                p++;
            if (slot[f] >= 0) {
                double v;
                if (!scan_number(&p, stop, decimal, &v) ||
                    /* between whitespace-separated fields nothing but blanks: "1.2.3" or
                       "9.5-0.1" is one field of text, not two numbers */
                    (sep == ' ' && p < stop && !is_blank(*p, sep) && *p != '\n' && *p != '\r')) {
                    res.stop = p - buf;
                    return res;
                }
                out[(Py_ssize_t)slot[f] * capacity + row] = v;
            } else {
                /* a field not used: skipped, whatever it holds, but no quotes */
                while (p < stop && *p != '\n' && *p != '\r' && *p != '"' &&
                       (sep == ' ' ? !is_blank(*p, sep) : *p != sep))
                    p++;
                if (p < stop && *p == '"') {
                    res.stop = p - buf;
                    return res;
                }
            }
            while (p < stop && is_blank(*p, sep))
                p++;
            if (f + 1 < n_fields) {
                if (sep != ' ') {
                    if (p >= stop || *p != sep) {
                        res.stop = p - buf;
                        return res;
                    }
                    p++;
                } else if (p >= stop || *p == '\n' || *p == '\r') {
                    res.stop = p - buf; /* a short line */
                    return res;
                }
            }
        }
        /* end of the line: "\n", "\r\n" or the end of the range */
        if (p < stop) {
            if (*p == '\r' && p + 1 < stop && p[1] == '\n')
                p++;
            if (*p != '\n') {
                res.stop = p - buf;
                return res;
            }
            p++;
        }
        row++;
        res.rows++;
    }
    return res;
}

/* Line feeds in p[0:n], eight bytes a step (exact byte-wise zero test). */
static Py_ssize_t count_lf(const char *p, Py_ssize_t n)
{
    const uint64_t ones = 0x0101010101010101ULL, low7 = 0x7f7f7f7f7f7f7f7fULL;
    Py_ssize_t i = 0, count = 0;
    while (n - i >= 8) {
        uint64_t lanes = 0; /* per-byte counts, at most 255 steps */
        int step;
        for (step = 0; step < 255 && n - i >= 8; step++, i += 8) {
            uint64_t w, x, nonzero;
            memcpy(&w, p + i, 8);
            x = w ^ (ones * '\n');               /* a line feed byte becomes 0 */
            nonzero = ((x & low7) + low7) | x;    /* high bit set where the byte is not 0 */
            lanes += (~nonzero >> 7) & ones;
        }
        lanes = (lanes & 0x00ff00ff00ff00ffULL) + ((lanes >> 8) & 0x00ff00ff00ff00ffULL);
        count += (Py_ssize_t)((lanes * 0x0001000100010001ULL) >> 48); /* sum of four 16-bit lanes */
    }
    for (; i < n; i++)
        count += (p[i] == '\n');
    return count;
}

static int one_char(PyObject *obj, const char *what, char *c)
{
    Py_ssize_t n;
    const char *s = PyUnicode_AsUTF8AndSize(obj, &n);
    if (s == NULL)
        return 0;
    if (n != 1) {
        PyErr_Format(PyExc_ValueError, "%s must be one ASCII character", what);
        return 0;
    }
    *c = s[0];
    return 1;
}

PyDoc_STRVAR(count_lines_doc,
             "count_lines(data, begin, end) -> int\n\n"
             "Line feeds in data[begin:end] (the GIL is released).");

static PyObject *count_lines(PyObject *self, PyObject *args)
{
    Py_buffer data;
    Py_ssize_t begin, end, count;
    if (!PyArg_ParseTuple(args, "y*nn", &data, &begin, &end))
        return NULL;
    if (begin < 0 || end > data.len || begin > end) {
        PyBuffer_Release(&data);
        PyErr_SetString(PyExc_ValueError, "range outside the data");
        return NULL;
    }
    Py_BEGIN_ALLOW_THREADS
    count = count_lf((const char *)data.buf + begin, end - begin);
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&data);
    return PyLong_FromSsize_t(count);
}

PyDoc_STRVAR(scan_doc,
             "scan(data, begin, end, sep, decimal, slots, out, capacity, row0) -> (rows, stop)\n\n"
             "Parse the lines of data[begin:end] into the writable float64 buffer out\n"
             "(slot-major, capacity rows a slot), starting at row row0.  slots holds one\n"
             "int per field: the output slot, or -1 for a field not used.  Returns the\n"
             "rows parsed and -1, or the rows parsed before the scan stopped and the\n"
             "byte offset where it stopped (then the caller parses the file otherwise).");

static PyObject *scan(PyObject *self, PyObject *args)
{
    Py_buffer data, out;
    Py_ssize_t begin, end, capacity, row0, n_slots_used = 0;
    PyObject *sep_obj, *dec_obj, *slots_obj;
    char sep, decimal;
    int slot[MAX_FIELDS];
    int n_fields, f;
    scan_result res;

    if (!PyArg_ParseTuple(args, "y*nnUUOw*nn", &data, &begin, &end, &sep_obj, &dec_obj, &slots_obj,
                          &out, &capacity, &row0))
        return NULL;
#define FAIL(exc, msg)                    \
    do {                                  \
        PyBuffer_Release(&data);          \
        PyBuffer_Release(&out);           \
        PyErr_SetString((exc), (msg));    \
        return NULL;                      \
    } while (0)
    if (!one_char(sep_obj, "sep", &sep) || !one_char(dec_obj, "decimal", &decimal)) {
        PyBuffer_Release(&data);
        PyBuffer_Release(&out);
        return NULL;
    }
    if (sep != ',' && sep != ';' && sep != '\t' && sep != '|' && sep != ' ')
        FAIL(PyExc_ValueError, "sep must be one of , ; tab | space");
    if (decimal != '.' && decimal != ',')
        FAIL(PyExc_ValueError, "decimal must be . or ,");
    if (decimal == sep)
        FAIL(PyExc_ValueError, "sep and decimal must differ");
    if (!PyTuple_Check(slots_obj))
        FAIL(PyExc_TypeError, "slots must be a tuple of ints");
    n_fields = (int)PyTuple_GET_SIZE(slots_obj);
    if (n_fields < 1 || n_fields > MAX_FIELDS)
        FAIL(PyExc_ValueError, "between 1 and 256 fields");
    for (f = 0; f < n_fields; f++) {
        long s = PyLong_AsLong(PyTuple_GET_ITEM(slots_obj, f));
        if (s == -1 && PyErr_Occurred()) {
            PyBuffer_Release(&data);
            PyBuffer_Release(&out);
            return NULL;
        }
        if (s < -1 || s >= n_fields)
            FAIL(PyExc_ValueError, "slot out of range");
        slot[f] = (int)s;
        if (s + 1 > n_slots_used)
            n_slots_used = s + 1;
    }
    if (begin < 0 || end > data.len || begin > end)
        FAIL(PyExc_ValueError, "range outside the data");
    if (capacity < 0 || row0 < 0 || row0 > capacity)
        FAIL(PyExc_ValueError, "bad capacity or first row");
    if (out.len < (Py_ssize_t)sizeof(double) * n_slots_used * capacity)
        FAIL(PyExc_ValueError, "output buffer too small");
    if (((uintptr_t)out.buf) % sizeof(double) != 0)
        FAIL(PyExc_ValueError, "output buffer not aligned");
#undef FAIL
#if FLT_EVAL_METHOD != 0
    /* extended-precision intermediates would break the one-rounding argument */
    res.rows = 0;
    res.stop = begin;
#else
    Py_BEGIN_ALLOW_THREADS
    res = scan_rows((const char *)data.buf, begin, end, sep, decimal, n_fields, slot,
                    (double *)out.buf, capacity, row0);
    Py_END_ALLOW_THREADS
#endif
    PyBuffer_Release(&data);
    PyBuffer_Release(&out);
    return Py_BuildValue("nn", res.rows, res.stop);
}

static PyMethodDef methods[] = {
    {"scan", scan, METH_VARARGS, scan_doc},
    {"count_lines", count_lines, METH_VARARGS, count_lines_doc},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef module = {
    PyModuleDef_HEAD_INIT, "_scan",
    "Fast path of the text-record reader: plain numeric delimited text to float64 columns.",
    -1, methods,
};

PyMODINIT_FUNC PyInit__scan(void) { return PyModule_Create(&module); }
