/* The inner loops of the digit-file passes (the index pass and the read-and-check stream).
 *
 * first_mismatch(data, units, table) -> int
 *     Index of the first byte i of ``data`` whose character class table[data[i]]
 *     differs from units[i], or -1 when every byte matches.  ``units`` is the
 *     layout's repeating unit of classes, repeated to at least len(data);
 *     ``table`` is 256 bytes (digit -> 'd', blank and line breaks kept, anything
 *     else '?').  Twin: loops.first_mismatch_py.
 *
 * extract(data, table, norm, out, out_pos, units) -> (digits, stray, newlines, regular)
 *     Validates every byte of an unlabelled chunk and copies its digits out:
 *     norm[data[i]] is written to out[out_pos + k] for the k-th digit (class 'd').
 *     Stops at the first byte of class '?' (its index is ``stray``; -1 when there
 *     is none; the digits before it are written).  ``newlines`` counts LF bytes
 *     before the stop.  ``units`` is None or classes to compare with (as in
 *     first_mismatch, at least len(data) long): ``regular`` is 1 when every
 *     examined byte that is not a digit has the class units[i], 0 when one has
 *     not, -1 without units (with as many digits as units has 'd's, 1 means every
 *     class equals units[i]: the caller compares the counts).  ``out`` must hold
 *     out_pos + len(data) bytes (bytes past the digits written are scratch).
 *     Twin: loops.extract_py.
 *
 * extract_labelled(data, table, norm, out, out_pos, layout, before, offset, line,
 *                  step, last_index) -> (consumed, digits, lines, stop, entries, last_index)
 *     The same for whole lines carrying position labels.  ``layout`` is
 *     loops.LoopLayout.codes(), the one description of a labelled layout for these
 *     loops (the codes are syntax.py's WHERE_CODES, SEP_CODES and KIND_CODES):
 *     the tuple (where, sep, radix, max_label, kind, unit): where 0 start / 1 end;
 *     sep 0 ':' or '|' with optional blanks / 1 blanks; radix 10 or 16 of the
 *     label; max_label its most characters (at most 18); kind 0 before / 1
 *     first / 2 through and unit 1 or 2 (digits or
 *     bytes) of what it counts.  For labels at both ends, where is 2 and five
 *     more ints (sep, radix, max_label, kind, unit) follow for the end label;
 *     the first five are the start label's.  Lines are taken in order while each has the
 *     plain form of its layout (see read_line) and its label equals the count
 *     its meaning implies; the loop stops at the first line that does not (stop
 *     1: a line of another form; 2: a label that disagrees; 0: no complete line
 *     left), before it, and Python's line reader takes that line.  ``before`` is
 *     the count of digits before ``data``; ``offset`` and ``line`` are the byte
 *     offset and line number of data[0]; an index entry (position, offset,
 *     line) is made at the start of a line holding digits once ``step`` bytes
 *     have passed since ``last_index``.  Twin: loops.extract_labelled_py.  label_agrees
 *     below is the compiled form of syntax.LabelMeaning.agrees, the one label rule.
 *
 * Runs of digits are taken eight bytes at a time (digit_bits, a test on a 64-bit word), on
 * little-endian targets with gcc or clang and the standard tables; elsewhere, byte by byte.
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

typedef struct {
    uint32_t T[256];
    int words; /* 1: the tables are charsets.class_table / charsets.norm_table, so the word loop may run */
    int hex;
} Tables;

static int is_blank(unsigned char c) { return c == ' ' || c == '\t'; }

static int make_tables(Tables *tb, const Py_buffer *table, const Py_buffer *norm) {
    if (table->len != 256 || norm->len != 256) {
        PyErr_SetString(PyExc_ValueError, "table and norm must be 256 bytes each");
        return -1;
    }
    const unsigned char *t = (const unsigned char *)table->buf, *m = (const unsigned char *)norm->buf;
    int hex = t['A'] == 'd', standard = 1;
    for (int c = 0; c < 256; c++) {
        uint32_t e = (uint32_t)t[c] << 16;
        if (t[c] == 'd') e |= E_DIGIT | m[c];
        else if (t[c] == '?') e |= E_STRAY;
        if (c == '\n') e |= E_LF;
        tb->T[c] = e;
        int digit = (c >= '0' && c <= '9') || (hex && ((c >= 'A' && c <= 'F') || (c >= 'a' && c <= 'f')));
        int ws = c == ' ' || c == '\t' || c == '\r' || c == '\n';
        int want_class = digit ? 'd' : ws ? c : '?';
        int want_norm = (hex && c >= 'a' && c <= 'f') ? c - 32 : c;
        if (t[c] != want_class || (digit && m[c] != want_norm)) standard = 0;
    }
    tb->hex = hex;
#if defined(__GNUC__) && defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    tb->words = standard;
#else
    tb->words = 0;
    (void)standard;
#endif
    return 0;
}

/* --- eight bytes at a time -------------------------------------------------------------------------
 * digit_bits(x) has the high bit of each byte of the little-endian word x set when that byte is a
 * digit ('0'-'9', and for hex 'A'-'F' and 'a'-'f'); *upper is x with 'a'-'f' turned into 'A'-'F'.
 * Each byte is tested on its low 7 bits with the high bit forced on (x | H) before subtracting, or off
 * (x & ~H) before adding, so no borrow or carry crosses a byte; a byte with its high bit set is never
 * a digit.  (lo | 0x80) - 0x30 has its high bit set iff lo >= 0x30; lo + 0x46 iff lo >= 0x3A. */
#define H8 0x8080808080808080ULL
#define B8(c) (0x0101010101010101ULL * (uint64_t)(c))

static inline uint64_t load64(const unsigned char *p) {
    uint64_t x;
    memcpy(&x, p, 8);
    return x;
}

static inline void store64(unsigned char *p, uint64_t x) { memcpy(p, &x, 8); }

static inline uint64_t digit_bits(uint64_t x, int hex, uint64_t *upper) {
    uint64_t lo = x & ~H8;
    uint64_t ok = ((lo | H8) - B8(0x30)) & ~(lo + B8(0x80 - 0x3A)) & ~x & H8;
    *upper = x;
    if (hex) {
        uint64_t y = lo | B8(0x20); /* 'A'-'F' and 'a'-'f' both become 'a'-'f' */
        uint64_t af = ((y | H8) - B8(0x61)) & ~(y + B8(0x80 - 0x67)) & ~x & H8;
        ok |= af;
        *upper = x ^ ((af & (x << 2)) >> 2); /* bit 5 (lower case) of each letter, cleared */
    }
    return ok;
}

static inline int first_byte(uint64_t bits) { return __builtin_ctzll(bits) >> 3; }

/* The word's digits without its one other byte j, packed down (the top byte is scratch). */
static inline uint64_t close_hole(uint64_t up, int j) {
    uint64_t keep = ((uint64_t)1 << (8 * j)) - 1; /* bytes 0..j-1; j <= 7 */
    return (up & keep) | ((up >> 8) & ~keep);
}

/* Copy the digits of s[a..b) to o (upper case) while the bytes are digits or blanks; returns the index
 * of the first other byte (b when there is none) and the digits copied in *nd.  Writes up to 8 bytes
 * past the last digit copied (o must hold b - a bytes). */
static Py_ssize_t copy_body(const unsigned char *s, Py_ssize_t a, Py_ssize_t b, unsigned char *o, const Tables *tb,
                            Py_ssize_t *nd) {
    Py_ssize_t i = a, k = 0;
#if defined(__GNUC__) && defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    if (tb->words) {
        while (i + 8 <= b) {
            uint64_t up, ok = digit_bits(load64(s + i), tb->hex, &up);
            uint64_t other = ~ok & H8;
            if (other == 0) { store64(o + k, up); i += 8; k += 8; continue; }
            int j = first_byte(other);
            if ((other & (other - 1)) == 0 && is_blank(s[i + j])) { /* one blank: skip it in place */
                store64(o + k, close_hole(up, j));
                i += 8;
                k += 7;
                continue;
            }
            store64(o + k, up);
            i += j;
            k += j;
            if (!is_blank(s[i])) { *nd = k; return i; }
            i++;
        }
    }
#endif
    for (; i < b; i++) {
        uint32_t e = tb->T[s[i]];
        if (e & E_DIGIT) o[k++] = (unsigned char)e;
        else if (!is_blank(s[i])) break;
    }
    *nd = k;
    return i;
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

static PyObject *extract(PyObject *self, PyObject *args) {
    Py_buffer data, table, norm, out, units = {0};
    Py_ssize_t out_pos;
    PyObject *units_obj;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*y*y*w*nO", &data, &table, &norm, &out, &out_pos, &units_obj)) return NULL;
    int have_units = units_obj != Py_None;
    PyObject *ret = NULL;
    Tables tb;
    if (have_units && PyObject_GetBuffer(units_obj, &units, PyBUF_SIMPLE) < 0) goto done;
    if (make_tables(&tb, &table, &norm) < 0) goto done;
    if (out_pos < 0 || out.len - out_pos < data.len || (have_units && units.len < data.len)) {
        PyErr_SetString(PyExc_ValueError, "out too short for the chunk's digits, or units shorter than data");
        goto done;
    }
    const unsigned char *d = (const unsigned char *)data.buf;
    const unsigned char *u = have_units ? (const unsigned char *)units.buf : NULL;
    unsigned char *o = (unsigned char *)out.buf + out_pos;
    const uint32_t *T = tb.T;
    Py_ssize_t n = data.len, i = 0, k = 0, stray = -1, nl = 0;
    int ubad = 0;
    Py_BEGIN_ALLOW_THREADS
#if defined(__GNUC__) && defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    /* Runs of digits eight at a time; each other byte on its own. */
    if (tb.words) {
        while (i + 8 <= n) {
            uint64_t up, ok = digit_bits(load64(d + i), tb.hex, &up);
            uint64_t other = ~ok & H8;
            if (other == 0) { store64(o + k, up); i += 8; k += 8; continue; }
            int j = first_byte(other);
            uint32_t e = T[d[i + j]];
            if (e & E_STRAY) {
                store64(o + k, up);
                k += j;
                stray = i + j;
                break;
            }
            nl += (e >> 10) & 1u;
            if (u && ((e >> 16) & 0xFFu) != u[i + j]) ubad = 1;
            if ((other & (other - 1)) == 0) { /* one blank or line break: skip it in place */
                store64(o + k, close_hole(up, j));
                i += 8;
                k += 7;
                continue;
            }
            store64(o + k, up);
            i += j + 1;
            k += j;
        }
    }
#endif
    for (; stray < 0 && i < n; i++) {
        uint32_t e = T[d[i]];
        if (e & E_STRAY) { stray = i; break; }
        if (e & E_DIGIT) {
            o[k++] = (unsigned char)e;
        } else {
            nl += (e >> 10) & 1u;
            if (u && ((e >> 16) & 0xFFu) != u[i]) ubad = 1;
        }
    }
    Py_END_ALLOW_THREADS
    ret = Py_BuildValue("nnni", k, stray, nl, have_units ? !ubad : -1);
done:
    PyBuffer_Release(&data);
    PyBuffer_Release(&table);
    PyBuffer_Release(&norm);
    PyBuffer_Release(&out);
    if (have_units && units.obj != NULL) PyBuffer_Release(&units);
    return ret;
}

/* --- labelled lines -------------------------------------------------------------------------------- */

/* One label column: sep 0 ':' or '|' with optional blanks / 1 blanks; radix 10 or 16; at most
 * max_label characters; what it counts: kind 0 before / 1 first / 2 through, in unit 1 (digits) or
 * 2 (bytes). */
typedef struct {
    int sep, radix, max_label, kind, unit;
} LabelEnd;

/* where 0: a label at the line start (column a); 1: at the end (a); 2: at both ends (a the start
 * label, b the end label). */
typedef struct {
    int where;
    LabelEnd a, b;
} LabelLayout;

static int label_value(unsigned char c, int radix) {
    if (c >= '0' && c <= '9') return c - '0';
    if (radix == 16) {
        if (c >= 'A' && c <= 'F') return c - 'A' + 10;
        if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    }
    return -1;
}

/* The label s[l0..l1): 1..max_label characters of its radix (the caller has checked them), its value
 * to *v.  0 when it is empty or too long. */
static int label_at(const unsigned char *s, Py_ssize_t l0, Py_ssize_t l1, const LabelEnd *c, uint64_t *v) {
    if (l1 - l0 < 1 || l1 - l0 > c->max_label) return 0;
    uint64_t x = 0;
    for (Py_ssize_t j = l0; j < l1; j++) x = x * (uint64_t)c->radix + (uint64_t)label_value(s[j], c->radix);
    *v = x;
    return 1;
}

/* A start label at s[k..] (k past the line's leading blanks) and its separator: the index just
 * after the separator's ':' or '|' (sep 0) or its first blank (sep 1), or -1.  Blanks after that
 * belong to the body, which skips them. */
static Py_ssize_t start_label(const unsigned char *s, Py_ssize_t k, Py_ssize_t e, const LabelEnd *c, uint64_t *v) {
    Py_ssize_t l0 = k;
    while (k < e && label_value(s[k], c->radix) >= 0) k++;
    if (!label_at(s, l0, k, c, v)) return -1;
    if (c->sep == 0) {
        while (k < e && is_blank(s[k])) k++;
        if (k == e || (s[k] != ':' && s[k] != '|')) return -1;
    } else if (k == e || !is_blank(s[k])) {
        return -1;
    }
    return k + 1;
}

/* The end label of s[0..e) as LabelSyntax("end").split_line finds it: the last word after a
 * separator, then blanks.  Sets *v to its value and returns where the separator starts (its
 * first blank, or its mark when no blank precedes it): the body ends there.  -1 when the line
 * ends otherwise. */
static Py_ssize_t find_end_label(const unsigned char *s, Py_ssize_t e, const LabelEnd *c, uint64_t *v) {
    Py_ssize_t k = e;
    while (k > 0 && is_blank(s[k - 1])) k--;
    const Py_ssize_t l1 = k;
    while (k > 0 && label_value(s[k - 1], c->radix) >= 0) k--;
    if (k > 0 && !is_blank(s[k - 1]) && s[k - 1] != ':' && s[k - 1] != '|') return -1; /* not a whole word */
    if (!label_at(s, k, l1, c, v)) return -1;
    if (c->sep == 0) {
        while (k > 0 && is_blank(s[k - 1])) k--;
        if (k == 0 || (s[k - 1] != ':' && s[k - 1] != '|')) return -1;
        k--;
    } else if (k == 0 || !is_blank(s[k - 1])) {
        return -1;
    }
    while (k > 0 && is_blank(s[k - 1])) k--;
    return k;
}

/* Read one line s[0..e) (line break and one trailing CR removed) in its plain form:
 *   start: [blanks] label sep body      end: body sep label [blanks]
 *   both:  [blanks] label sep body sep label [blanks]
 * where a label is 1..max_label label characters, sep ':' or '|' with optional blanks
 * around it (sep 0) or one or more blanks (sep 1), and body holds only digits and
 * blanks.  A line of blanks only is plain too (no label, no digits).  These are
 * exactly the lines on which LabelSyntax.split_labels finds the label(s) and a body of
 * digits and blanks (its patterns are greedy and a label is a maximal run of label
 * characters ended by a separator; for both ends the end label is split off first and
 * the start label from what is left, here as there: a blank before an end mark belongs
 * to the end's separator); any other line returns 0 and is left to
 * Python's line reader.  Copies the body's digits to o (scratch unless the caller keeps
 * them), sets *has_label, the label values (v[0] the start or only label, v[1] the end
 * label of "both") and *nd.  Returns 1 when the line is plain. */
static int read_line(const unsigned char *s, Py_ssize_t e, const LabelLayout *L, const Tables *tb,
                     unsigned char *o, int *has_label, uint64_t v[2], Py_ssize_t *nd) {
    Py_ssize_t k = 0;
    *has_label = 0;
    *nd = 0;
    while (k < e && is_blank(s[k])) k++;
    if (k == e) return 1; /* blanks only */
    if (L->where == 1) {
        Py_ssize_t b1 = find_end_label(s, e, &L->a, &v[0]);
        if (b1 < 0 || copy_body(s, 0, b1, o, tb, nd) != b1) return 0;
    } else if (L->where == 0) {
        Py_ssize_t b0 = start_label(s, k, e, &L->a, &v[0]);
        if (b0 < 0 || copy_body(s, b0, e, o, tb, nd) != e) return 0;
    } else { /* both: the end label first, then the start label from what is left */
        Py_ssize_t b1 = find_end_label(s, e, &L->b, &v[1]);
        if (b1 < 0) return 0;
        Py_ssize_t b0 = start_label(s, k, b1, &L->a, &v[0]);
        if (b0 < 0 || copy_body(s, b0, b1, o, tb, nd) != b1) return 0;
    }
    *has_label = 1;
    return 1;
}

/* Does the label value v say what column c implies for a line of nd digits after pos? */
static int label_agrees(const LabelEnd *c, uint64_t v, Py_ssize_t pos, Py_ssize_t nd) {
    Py_ssize_t n = c->kind == 2 ? pos + nd : pos;
    return n % c->unit == 0 && v == (uint64_t)(n / c->unit + (c->kind == 1));
}

static int end_ok(const LabelEnd *c) {
    return (c->sep == 0 || c->sep == 1) && (c->radix == 10 || c->radix == 16) && c->max_label >= 1 &&
           c->max_label <= (c->radix == 10 ? 18 : 16) && c->kind >= 0 && c->kind <= 2 && (c->unit == 1 || c->unit == 2);
}

static PyObject *extract_labelled(PyObject *self, PyObject *args) {
    Py_buffer data, table, norm, out;
    Py_ssize_t out_pos, before, offset, line, step, last_index;
    PyObject *layout;
    LabelLayout L;
    (void)self;
    if (!PyArg_ParseTuple(args, "y*y*y*w*nOnnnnn", &data, &table, &norm, &out, &out_pos, &layout, &before, &offset,
                          &line, &step, &last_index))
        return NULL;
    L.b = (LabelEnd){0, 10, 1, 0, 1};
    Py_ssize_t fields = PyTuple_Check(layout) ? PyTuple_GET_SIZE(layout) : -1;
    if (!PyArg_ParseTuple(layout, "iiiiii|iiiii;extract_labelled: layout is a tuple of 6 or 11 ints", &L.where,
                          &L.a.sep, &L.a.radix, &L.a.max_label, &L.a.kind, &L.a.unit, &L.b.sep, &L.b.radix,
                          &L.b.max_label, &L.b.kind, &L.b.unit)) {
        PyBuffer_Release(&data);
        PyBuffer_Release(&table);
        PyBuffer_Release(&norm);
        PyBuffer_Release(&out);
        return NULL;
    }
    PyObject *ret = NULL, *entries = NULL;
    Py_ssize_t *ent = NULL, n_ent = 0;
    Tables tb;
    if (make_tables(&tb, &table, &norm) < 0) goto done;
    if (out_pos < 0 || out.len - out_pos < data.len || L.where < 0 || L.where > 2 || fields != (L.where == 2 ? 11 : 6) ||
        !end_ok(&L.a) || !end_ok(&L.b) || step < 1 || before < 0) {
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
        Py_ssize_t len = nlp - s, e = len, nd = 0;
        if (e > 0 && s[e - 1] == '\r') e--;
        int has_label;
        uint64_t v[2] = {0, 0};
        /* The digits land at o + k; they count only when the line is taken. */
        if (!read_line(s, e, &L, &tb, o + k, &has_label, v, &nd)) { stop = 1; break; }
        if (has_label) {
            if (!label_agrees(&L.a, v[0], pos, nd) || (L.where == 2 && !label_agrees(&L.b, v[1], pos, nd))) {
                stop = 2;
                break;
            }
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
            k += nd;
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
