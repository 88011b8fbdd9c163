/* The inner loop of the digit-file first pass for a regular layout.
 *
 * first_mismatch(data, units, table) -> int
 *
 * Returns the index of the first byte i of ``data`` whose character class
 * table[data[i]] differs from units[i], or -1 when every byte matches.  ``units``
 * is the layout's repeating unit of classes, repeated to at least len(data);
 * ``table`` is 256 bytes (digit -> 'd', blank and line breaks kept, anything
 * else '?').  The twin in index.py does the same with bytes.translate.
 * Portable C, no target-specific instructions.
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <stdint.h>
#include <string.h>

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

static PyMethodDef methods[] = {
    {"first_mismatch", first_mismatch, METH_VARARGS,
     "first_mismatch(data, units, table) -> index of the first byte whose class differs, or -1"},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef module = {PyModuleDef_HEAD_INIT, "_index", "Digit-file first-pass loop.", -1, methods,
                                    NULL, NULL, NULL, NULL};

PyMODINIT_FUNC PyInit__index(void) { return PyModule_Create(&module); }
