"""Random layouts and mutations, judged against what the writer knows (for the fuzz script and CI)."""

from __future__ import annotations

import bz2
import gzip
import lzma
import random
import time
from dataclasses import dataclass, field

from spotcheck.errors import SpotcheckError
from tests.fuzz.oracle import (
    acceptable_mutation,
    another_valid_file,
    place_named,
    read_back,
    read_layout,
    truth_labels,
    widen,
)
from tests.fuzz.writer import (
    BLANK_SEPS,
    FOOTERS,
    HEADERS,
    LONE_SEPS,
    MARK_SEPS,
    MARKS,
    NO_LETTER_MARKS,
    PAIRS,
    TABLE_SEPS,
    TYPESET_SEPS,
    Label,
    Spec,
    as_table,
    write,
)

HANG_SECONDS = 5.0


def random_spec(rng: random.Random, max_digits: int = 400) -> Spec:
    base = rng.choice((10, 16))
    alphabet = "0123456789" if base == 10 else "0123456789ABCDEF"
    n = rng.randint(1, max_digits)
    digits = "".join(rng.choice(alphabet) for _ in range(n))
    if base == 16 and not any(c in "ABCDEF" for c in digits[:200]):
        at = rng.randrange(min(n, 200))
        digits = digits[:at] + rng.choice("ABCDEF") + digits[at + 1 :]
    width = rng.choice((None, rng.randint(1, 120), rng.randint(8, 64)))
    lines = 1 if width is None else -(-n // width)
    label = None
    if rng.random() < 0.6:
        seps = MARK_SEPS + (BLANK_SEPS if lines >= 8 and (width or 0) >= 2 else ())
        if lines == 1:
            seps = LONE_SEPS
        unit = 2 if base == 16 and width and width % 2 == 0 and n % 2 == 0 and rng.random() < 0.4 else 1
        where = rng.choice(("start", "end", "both"))
        label = Label(
            where,
            16 if unit == 2 else 10,
            rng.choice(seps),
            rng.choice(("before", "first")) if where != "end" else "through",
            unit,
            rng.choice((0, 0, 6, 8)),
            rng.choice(seps) if where == "both" else "",
            rng.choice((0, 0, 6, 8)) if where == "both" else 0,
        )
    compression = rng.choice((None,) * 8 + ("gzip", "bzip2", "xz"))
    header = tuple(rng.choice(HEADERS) for _ in range(rng.choice((0, 0, 1, 2))))
    group = rng.choice((None, rng.randint(1, 12)))
    # What general-purpose software writes around the digits (spotcheck/digitfile/writers.py).
    plain_end = label is None or label.where == "start"
    mark, opening = "", ""
    if plain_end and rng.random() < 0.15:
        if rng.random() < 0.5 and not header and label is None:
            opening, mark = rng.choice(PAIRS)
        else:
            mark = rng.choice(MARKS if base == 10 and n >= 64 else NO_LETTER_MARKS)
    spec = Spec(
        digits=digits,
        base=base,
        integer_part=rng.choice((None, None, "3", "0", "12")),
        width=width,
        group=group,
        group_sep=rng.choice(TYPESET_SEPS)
        if group and rng.random() < 0.15
        else rng.choice((" ", " ", "\t", "  ")),
        label=label,
        header=header,
        newline=rng.choice(("\n", "\n", "\r\n", "\r")),
        lower=base == 16 and rng.random() < 0.3,
        final_newline=rng.random() < 0.8,
        compression=compression,
        indent=rng.choice(("", "", " ")),
        continuation=plain_end and lines > 1 and rng.random() < 0.15,
        opening=opening,
        mark=mark,
        footer=tuple(rng.choice(FOOTERS) for _ in range(rng.choice((1, 2)))) if rng.random() < 0.15 else (),
        page=rng.randint(1, 6) if lines > 2 and (width or 0) >= 8 and rng.random() < 0.15 else None,
    )
    if rng.random() < 0.08 and n >= 8:  # a table of positions and digits (writers.py)
        w = rng.choice((1, 1, rng.randint(1, 64)))
        spec = as_table(spec, rng.choice(TABLE_SEPS), rng.choice(("before", "first")), w)
    return spec


def compress(spec: Spec, content: bytes) -> bytes:
    if spec.compression == "gzip":
        return gzip.compress(content, mtime=0)
    if spec.compression == "bzip2":
        return bz2.compress(content)
    if spec.compression == "xz":
        return lzma.compress(content)
    return content


@dataclass
class Tally:
    inputs: int = 0
    exact: int = 0
    refused: int = 0
    findings: int = 0
    crashes: int = 0
    hangs: int = 0
    misreads: int = 0
    another_valid: int = 0  # read as another correct file of the model, proven byte for byte
    unplaced: int = 0  # refused without naming a place
    examples: list[str] = field(default_factory=list)

    def bad(self, kind: str, what: str) -> None:
        setattr(self, kind, getattr(self, kind) + 1)
        if len(self.examples) < 20:
            self.examples.append(f"{kind}: {what}")


def mutation(rng: random.Random, spec: Spec, content: bytes, spans: list[tuple[int, int]]):
    """``(new content, a, b, inserted bytes, name)``: bytes ``[a, b)`` replaced by ``inserted`` bytes."""
    kind = rng.choice(("flip", "insert", "delete", "label", "double", "drop"))
    if not content:
        kind = "insert"
    # Half the mutations hit the first 4 lines, where detection looks.
    limit = len(content)
    if rng.random() < 0.5:
        cut = 0
        for _ in range(4 + len(spec.header)):
            nxt = max(content.find(b"\n", cut), content.find(b"\r", cut))
            cut = limit if nxt < 0 else nxt + 1
        limit = max(1, min(limit, cut))
    if kind == "label" and spans:
        s, e = rng.choice(spans)
        if e > s:
            a = rng.randrange(s, e)
            old = content[a]
            new = rng.choice([c for c in b"0123456789abcdefABCDEF" if c != old])
            return content[:a] + bytes([new]) + content[a + 1 :], a, a + 1, 1, "label"
        kind = "flip"
    if kind in ("double", "drop"):
        nl = b"\r" if spec.newline == "\r" else b"\n"
        starts = [0] + [i + 1 for i, c in enumerate(content) if c == nl[0]]
        starts = [s for s in starts if s < len(content)]
        if starts:
            s = rng.choice(starts)
            e = content.find(nl, s)
            e = len(content) if e < 0 else e + 1
            if kind == "double":
                return content[:e] + content[s:e] + content[e:], e, e, e - s, "double"
            return content[:s] + content[e:], s, e, 0, "drop"
        kind = "flip"
    a = rng.randrange(max(1, limit)) if content else 0
    pool = b"0123456789ABCDEFabcdefxyz.:| \t\r\n#-\x00\xff"
    if kind == "flip" and content:
        new = rng.choice([c for c in pool if c != content[a]])
        return content[:a] + bytes([new]) + content[a + 1 :], a, a + 1, 1, "flip"
    if kind == "delete" and content:
        return content[:a] + content[a + 1 :], a, a + 1, 0, "delete"
    new = rng.choice(pool)
    return content[:a] + bytes([new]) + content[a:], a, a, 1, "insert"


def chars_before(offsets: list[int], byte: int) -> int:
    lo, hi = 0, len(offsets)
    while lo < hi:
        mid = (lo + hi) // 2
        if offsets[mid] < byte:
            lo = mid + 1
        else:
            hi = mid
    return lo


def one_input(rng: random.Random, tally: Tally, directory: str, mutate: bool) -> None:
    spec = random_spec(rng)
    w = write(spec)
    tally.inputs += 1
    if not mutate:
        t0 = time.perf_counter()
        try:
            try:
                got, findings = read_back(spec, w.stored, directory)
            except SpotcheckError as exc:
                if getattr(exc, "choice", None) != "labels":
                    raise
                got, findings = read_back(spec, w.stored, directory, labels=truth_labels(spec))
        except SpotcheckError as exc:
            tally.bad("misreads", f"correct file refused: {exc} {spec!r}"[:400])
            return
        except Exception as exc:  # noqa: BLE001 - a crash is what the fuzz counts
            tally.bad("crashes", f"{type(exc).__name__}: {exc} {spec!r}"[:400])
            return
        if time.perf_counter() - t0 > HANG_SECONDS:
            tally.bad("hangs", repr(spec)[:300])
        if got != w.full or findings:
            tally.bad("misreads", f"round trip: got {got[:40]!r} want {w.full[:40]!r} {spec!r}"[:400])
        else:
            tally.exact += 1
        return
    content, a, b, inserted, kind = mutation(rng, spec, w.content, w.label_spans)
    lo, hi = chars_before(w.offsets, a), chars_before(w.offsets, b)
    lo, hi, inserted = widen(w, lo, hi, a, b, inserted, spec.label.widest_sep if spec.label else 0)
    t0 = time.perf_counter()
    try:
        got, findings, layout = read_layout(spec, compress(spec, content), directory)
    except SpotcheckError as exc:
        if time.perf_counter() - t0 > HANG_SECONDS:
            tally.bad("hangs", repr(spec)[:300])
        tally.refused += 1
        if not place_named(exc):
            tally.bad("unplaced", f"{kind} at {a}: {exc}"[:300])
        return
    except Exception as exc:  # noqa: BLE001
        tally.bad("crashes", f"{kind} at {a}: {type(exc).__name__}: {exc} {spec!r}"[:400])
        return
    if time.perf_counter() - t0 > HANG_SECONDS:
        tally.bad("hangs", repr(spec)[:300])
    if findings:
        tally.findings += 1
    if acceptable_mutation(w.full, got, findings, lo, hi, inserted):
        tally.exact += 1
    elif another_valid_file(spec, content, got, layout) is not None:
        tally.another_valid += 1
    else:
        tally.bad(
            "misreads",
            f"{kind} at byte {a} (chars {lo}:{hi}, +{inserted}): got {got[:60]!r} want {w.full[:60]!r} "
            f"content {content[:160]!r} near the mutation {content[max(0, a - 80) : a + 80]!r} "
            f"got there {got[max(0, lo - 40) : lo + 40]!r} want there {w.full[max(0, lo - 40) : lo + 40]!r}",
        )
