/* The inner loops of the digit-file passes (the index pass and the read-and-check stream).
 *
 * first_mismatch(data, units, table) -> int
 *     Index of the first byte i of ``data`` whose character class table[data[i]]
 *     differs from units[i], or -1 when every byte matches.  ``units`` is the
 *     layout's repeating unit of classes, repeated to at least len(data);
 *     ``table`` is 256 bytes (digit -> 'd', blank and line breaks kept, anything
 *     else '?').  Twin: index.first_mismatch_py.
 *
 * extract(data, table, norm, out, out_pos, units) -> (digits, stray, newlines, regular)
 *     Validates every byte of an unlabelled chunk and copies its digits out:
 *     norm[data[i]] is written to out[out_pos + k] for the k-th digit (class 'd').
 *     Stops at the first byte of class '?' (its index is ``stray``; -1 when there
 *     is none; the digits before it are written).  ``newlines`` counts LF bytes
 *     before the stop.  ``units`` is None or classes to compare with (as in
 *     first_mismatch, at least len(data) long): ``regular`` is 1 when every
 *     examined byte's class equals units[i], 0 when one differs, -1 without units.
 *     ``out`` must hold out_pos + len(data) bytes.  Twin: stream.extract_py.
 *
 * extract_labelled(data, table, norm, out, out_pos, layout, before, offset, line,
 *                  step, last_index) -> (consumed, digits, lines, stop, entries, last_index)
 *     The same for whole lines carrying a position label.  ``layout`` is the
 *     tuple (where, sep, radix, max_label, kind, unit): where 0 start / 1 end;
 *     sep 0 ':' or '|' with optional blanks / 1 blanks; radix 10 or 16 of the
 *     label; max_label its most characters (at most 18); kind 0 before / 1
 *     first / 2 through (stream.py's KIND codes) and unit 1 or 2 (digits or
 *     bytes) of what it counts.  Lines are taken in order while each has the
 *     plain form of its layout (see parse_line) and its label equals the count
 *     its meaning implies; the loop stops at the first line that does not (stop
 *     1: a line of another form; 2: a label that disagrees; 0: no complete line
 *     left), before it, and Python's line reader takes that line.  ``before`` is
 *     the count of digits before ``data``; ``offset`` and ``line`` are the byte
 *     offset and line number of data[0]; an index entry (position, offset,
 *     line) is made at the start of a line holding digits once ``step`` bytes
 *     have passed since ``last_index``.  Twin: stream.extract_labelled_py.
 *
 * Limits: label values fit 64 bits (18 decimal or 16 hex characters); counts
 * and offsets are Py_ssize_t.  Portable C, no target-specific instructions.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>
#include <string.h>

/* One 32-bit entry per byte value: bits 0-7 the digit to write (norm), bit 8 set for a digit,
 * bit 9 for a stray byte, bit 10 for LF, bits 16-23 the byte's class. */
#define E_DIGIT 0x100u
#define E_STRAY 0x200u
#define E_LF 0x400u

static int make_entries(uint32_t *T, const Py_buffer *table, const Py_buffer *norm) {
    if (table->len != 256 || norm->len != 256) {
        PyErr_SetString(PyExc_ValueError, "table and norm must be 256 bytes each");
        return -1;
    }
    const unsigned char *t = (const unsigned char *)table->buf, *m = (const unsigned char *)norm->buf;
    for (int c = 0; c < 256; c++) {
        uint32_t e = (uint32_t)t[c] << 16;
        if (t[c] == 'd') e |= E_DIGIT | m[c];
        else if (t[c] == '?') e |= E_STRAY;
        if (c == '\n') e |= E_LF;
        T[c] = e;
    }
    return 0;
}

static PyObject *first_mismatch(PyObject *self, PyObject *args) {
    Py_buffer data, units, table;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*y*y*", &data, &units, &table)) return NULL;
    Py_ssize_t result = -1;
    if (table.len != 256 || units.len < data.len) {
        PyBuffer_Release(&data);
        PyBuffer_Release(&units);
        PyBuffer_Release(&table);
        PyErr_SetString(PyExc_ValueError, "table must be 256 bytes and units at least as long as data");
        return NULL;
    }
    const unsigned char *d = (const unsigned char *)data.buf;
    const unsigned char *u = (const unsigned char *)units.buf;
    const unsigned char *t = (const unsigned char *)table.buf;
    Py_ssize_t n = data.len, i = 0;
    Py_BEGIN_ALLOW_THREADS
    /* Eight bytes at a time: build the classes of a word and compare it whole. */
    for (; i + 8 <= n; i += 8) {
        unsigned char c[8];
        c[0] = t[d[i]]; c[1] = t[d[i + 1]]; c[2] = t[d[i + 2]]; c[3] = t[d[i + 3]];
        c[4] = t[d[i + 4]]; c[5] = t[d[i + 5]]; c[6] = t[d[i + 6]]; c[7] = t[d[i + 7]];
        if (memcmp(c, u + i, 8) != 0) break;
    }
    for (; i < n; i++) {
        if (t[d[i]] != u[i]) { result = i; break; }
    }
    Py_END_ALLOW_THREADS
    PyBuffer_Release(&data);
    PyBuffer_Release(&units);
    PyBuffer_Release(&table);
    return PyLong_FromSsize_t(result);
}

/* One byte of the extract loop: write its digit (the slot is overwritten unless it is one). */
#define STEP(j)                                  \
    do {                                         \
        uint32_t e_ = T[d[i + (j)]];             \
        o[k] = (unsigned char)e_;                \
        k += (e_ >> 8) & 1u;                     \
        nl += (e_ >> 10) & 1u;                   \
        if (u) diff |= ((e_ >> 16) & 0xFFu) ^ u[i + (j)]; \
    } while (0)

static PyObject *extract(PyObject *self, PyObject *args) {
    Py_buffer data, table, norm, out, units = {0};
    Py_ssize_t out_pos;
    PyObject *units_obj;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*y*y*w*nO", &data, &table, &norm, &out, &out_pos, &units_obj)) return NULL;
    int have_units = units_obj != Py_None;
    PyObject *ret = NULL;
    uint32_t T[256];
    if (have_units && PyObject_GetBuffer(units_obj, &units, PyBUF_SIMPLE) < 0) goto done;
    if (make_entries(T, &table, &norm) < 0) goto done;
    if (out_pos < 0 || out.len - out_pos < data.len || (have_units && units.len < data.len)) {
        PyErr_SetString(PyExc_ValueError, "out too short for the chunk's digits, or units shorter than data");
        goto done;
    }
    const unsigned char *d = (const unsigned char *)data.buf;
    const unsigned char *u = have_units ? (const unsigned char *)units.buf : NULL;
    unsigned char *o = (unsigned char *)out.buf + out_pos;
    Py_ssize_t n = data.len, i = 0, k = 0, stray = -1, nl = 0;
    uint32_t diff = 0;
    Py_BEGIN_ALLOW_THREADS
    for (; i + 8 <= n; i += 8) {
        uint32_t f = T[d[i]] | T[d[i + 1]] | T[d[i + 2]] | T[d[i + 3]] | T[d[i + 4]] | T[d[i + 5]] |
                     T[d[i + 6]] | T[d[i + 7]];
        if (f & E_STRAY) break; /* the byte-by-byte loop below finds it */
        STEP(0); STEP(1); STEP(2); STEP(3); STEP(4); STEP(5); STEP(6); STEP(7);
    }
    for (; i < n; i++) {
        if (T[d[i]] & E_STRAY) { stray = i; break; }
        STEP(0);
    }
    Py_END_ALLOW_THREADS
    ret = Py_BuildValue("nnni", k, stray, nl, have_units ? (diff == 0) : -1);
done:
    PyBuffer_Release(&data);
    PyBuffer_Release(&table);
    PyBuffer_Release(&norm);
    PyBuffer_Release(&out);
    if (have_units && units.obj != NULL) PyBuffer_Release(&units);
    return ret;
}
#undef STEP

/* --- labelled lines -------------------------------------------------------------------------------- */

typedef struct {
    int where, sep, radix, max_label, kind, unit;
} LabelLayout;

static int is_blank(unsigned char c) { return c == ' ' || c == '\t'; }

static int label_value(unsigned char c, int radix) {
    if (c >= '0' && c <= '9') return c - '0';
    if (radix == 16) {
        if (c >= 'A' && c <= 'F') return c - 'A' + 10;
        if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    }
    return -1;
}

/* Parse one line s[0..e) (line break and one trailing CR removed) in its plain form:
 *   start: [blanks] label sep body      end: body sep label [blanks]
 * where label is 1..max_label label characters, sep ':' or '|' with optional blanks
 * around it (sep 0) or one or more blanks (sep 1), and body holds only digits and
 * blanks.  A line of blanks only is plain too (no label, no digits).  These are
 * exactly the lines on which LabelSyntax.split_line finds this label and body (its
 * patterns are greedy and a label is a maximal run of label characters ended by a
 * separator); any other line returns 0 and is left to Python's line reader.
 * Sets *has_label, *value and [*b0, *b1) (the body).  Returns 1 when plain. */
static int parse_line(const unsigned char *s, Py_ssize_t e, const LabelLayout *L, const uint32_t *T,
                      int *has_label, uint64_t *value, Py_ssize_t *b0, Py_ssize_t *b1) {
    Py_ssize_t k = 0, l0, l1;
    *has_label = 0;
    while (k < e && is_blank(s[k])) k++;
    if (k == e) { *b0 = *b1 = e; return 1; } /* blanks only */
    if (L->where == 0) {
        l0 = k;
        while (k < e && label_value(s[k], L->radix) >= 0) k++;
        l1 = k;
        if (L->sep == 0) {
            while (k < e && is_blank(s[k])) k++;
            if (k == e || (s[k] != ':' && s[k] != '|')) return 0;
            k++;
        } else if (k == e || !is_blank(s[k])) {
            return 0;
        }
        while (k < e && is_blank(s[k])) k++;
        *b0 = k;
        *b1 = e;
    } else if (L->sep == 0) {
        k = 0;
        while (k < e && (T[s[k]] & E_DIGIT || is_blank(s[k]))) k++;
        if (k == e || (s[k] != ':' && s[k] != '|')) return 0;
        *b0 = 0;
        *b1 = k;
        k++;
        while (k < e && is_blank(s[k])) k++;
        l0 = k;
        while (k < e && label_value(s[k], L->radix) >= 0) k++;
        l1 = k;
        while (k < e && is_blank(s[k])) k++;
        if (k != e) return 0;
    } else {
        k = e;
        while (k > 0 && is_blank(s[k - 1])) k--;
        l1 = k;
        while (k > 0 && !is_blank(s[k - 1])) k--;
        l0 = k;
        if (l0 == 0) return 0; /* no blank before the last word */
        *b0 = 0;
        *b1 = l0;
        for (Py_ssize_t j = l0; j < l1; j++)
            if (label_value(s[j], L->radix) < 0) return 0;
    }
    if (l1 - l0 < 1 || l1 - l0 > L->max_label) return 0;
    for (Py_ssize_t j = *b0; j < *b1; j++)
        if (!(T[s[j]] & E_DIGIT) && !is_blank(s[j])) return 0;
    uint64_t v = 0;
    for (Py_ssize_t j = l0; j < l1; j++) v = v * (uint64_t)L->radix + (uint64_t)label_value(s[j], L->radix);
    *has_label = 1;
    *value = v;
    return 1;
}

static PyObject *extract_labelled(PyObject *self, PyObject *args) {
    Py_buffer data, table, norm, out;
    Py_ssize_t out_pos, before, offset, line, step, last_index;
    LabelLayout L;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*y*y*w*n(iiiiii)nnnnn", &data, &table, &norm, &out, &out_pos, &L.where,
                          &L.sep, &L.radix, &L.max_label, &L.kind, &L.unit, &before, &offset, &line, &step,
                          &last_index))
        return NULL;
    PyObject *ret = NULL, *entries = NULL;
    Py_ssize_t *ent = NULL, n_ent = 0;
    uint32_t T[256];
    if (make_entries(T, &table, &norm) < 0) goto done;
    if (out_pos < 0 || out.len - out_pos < data.len || (L.where != 0 && L.where != 1) || (L.sep != 0 && L.sep != 1) ||
        (L.radix != 10 && L.radix != 16) || L.max_label < 1 || L.max_label > (L.radix == 10 ? 18 : 16) ||
        L.kind < 0 || L.kind > 2 || (L.unit != 1 && L.unit != 2) || step < 1 || before < 0) {
        PyErr_SetString(PyExc_ValueError, "extract_labelled: bad layout or buffer sizes");
        goto done;
    }
    /* At most one entry per step bytes, plus one. */
    Py_ssize_t cap = data.len / step + 2;
    ent = (Py_ssize_t *)PyMem_Malloc(sizeof(Py_ssize_t) * 3 * (size_t)cap);
    if (ent == NULL) { PyErr_NoMemory(); goto done; }
    const unsigned char *d = (const unsigned char *)data.buf;
    unsigned char *o = (unsigned char *)out.buf + out_pos;
    Py_ssize_t n = data.len, lo = 0, k = 0, lines = 0, pos = before;
    int stop = 0;
    Py_BEGIN_ALLOW_THREADS
    while (lo < n) {
        const unsigned char *s = d + lo;
        const unsigned char *nlp = memchr(s, '\n', (size_t)(n - lo));
        if (nlp == NULL) { stop = 0; break; }
        Py_ssize_t len = nlp - s, e = len;
        if (e > 0 && s[e - 1] == '\r') e--;
        int has_label;
        uint64_t value = 0;
        Py_ssize_t b0 = 0, b1 = 0;
        if (!parse_line(s, e, &L, T, &has_label, &value, &b0, &b1)) { stop = 1; break; }
        Py_ssize_t nd = 0;
        for (Py_ssize_t j = b0; j < b1; j++) nd += (T[s[j]] >> 8) & 1u;
        if (has_label) {
            Py_ssize_t c = L.kind == 2 ? pos + nd : pos;
            if (c % L.unit != 0 || value != (uint64_t)(c / L.unit + (L.kind == 1))) { stop = 2; break; }
        } else if (nd) {
            stop = 1; /* a digit line without a label: Python records it */
            break;
        }
        if (nd) {
            if (offset + lo - last_index >= step && n_ent < cap) {
                ent[3 * n_ent] = pos + 1;
                ent[3 * n_ent + 1] = offset + lo;
                ent[3 * n_ent + 2] = line + lines;
                n_ent++;
                last_index = offset + lo;
            }
            for (Py_ssize_t j = b0; j < b1; j++) {
                uint32_t x = T[s[j]];
                o[k] = (unsigned char)x;
                k += (x >> 8) & 1u;
            }
            pos += nd;
        }
        lines++;
        lo += len + 1;
    }
    Py_END_ALLOW_THREADS
    entries = PyList_New(n_ent);
    if (entries == NULL) goto done;
    for (Py_ssize_t j = 0; j < n_ent; j++) {
        PyObject *t = Py_BuildValue("(nnn)", ent[3 * j], ent[3 * j + 1], ent[3 * j + 2]);
        if (t == NULL) goto done;
        PyList_SET_ITEM(entries, j, t);
    }
    ret = Py_BuildValue("nnniOn", lo, k, lines, stop, entries, last_index);
done:
    Py_XDECREF(entries);
    PyMem_Free(ent);
    PyBuffer_Release(&data);
    PyBuffer_Release(&table);
    PyBuffer_Release(&norm);
    PyBuffer_Release(&out);
    return ret;
}

static PyMethodDef methods[] = {
    {"first_mismatch", first_mismatch, METH_VARARGS,
     "first_mismatch(data, units, table) -> index of the first byte whose class differs, or -1"},
    {"extract", extract, METH_VARARGS,
     "extract(data, table, norm, out, out_pos, units) -> (digits, stray, newlines, regular)"},
    {"extract_labelled", extract_labelled, METH_VARARGS,
     "extract_labelled(data, table, norm, out, out_pos, layout, before, offset, line, step, last_index)"
     " -> (consumed, digits, lines, stop, entries, last_index)"},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_index", "Digit-file pass loops.", -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__index(void) { return PyModule_Create(&module); }
