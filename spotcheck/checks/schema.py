"""The documented JSON schema of ``verify``, ``locate``, ``scan`` and ``compare`` reports (``--json``).

A JSON Schema (draft 2020-12) as plain data; ``spotcheck schema`` prints it and
the tests validate real reports against it.  Fields may be added in later
versions; none is removed or changes meaning without a new ``schema_version``.
"""

from __future__ import annotations

from typing import Any

SCHEMA_VERSION = 2
"""2: ``locate`` says ``match`` only after every digit was compared (``unconfirmed`` otherwise);
label findings are damage (``labels_consistent``); ``exhaustive`` and ``covered`` in every report.
One version for every kind of report: ``compare`` reports carry it too (they said 1 before)."""

_INT_OR_NULL = {"type": ["integer", "null"]}
_NOTE = {
    "type": "object",
    "required": ["code"],
    "properties": {"code": {"type": "string"}},
    "description": "a note as a code and its numbers (the other keys); the report words it",
}
_STR_OR_NULL = {"type": ["string", "null"]}

_FILE = {
    "type": "object",
    "required": ["path", "size_bytes", "base", "count", "checked", "constant", "formula"],
    "properties": {
        "path": {"type": "string"},
        "size_bytes": {"type": "integer", "minimum": 0, "description": "file size on disk"},
        "base": {"enum": [10, 16]},
        "count": {"type": "integer", "minimum": 0, "description": "digits after the point"},
        "checked": {"type": "integer", "minimum": 0, "description": "digits under check (--limit)"},
        "first": {
            "type": "integer",
            "minimum": 1,
            "description": "position in the expansion of the file's first digit (1 unless the file is a "
            "stretch from deeper in it); every position in the report counts from the expansion's start",
        },
        "first_how": {
            "enum": ["start", "given", "labels", "labels and engine digits"],
            "description": "how `first` was learnt: the file's start, stated, its labels, or its labels "
            "with certified digits settling whether they count from 0 or 1",
        },
        "constant": {"type": "string"},
        "constant_how": {"type": "string", "description": "how the constant was decided"},
        "formula": {"type": "string", "description": "engine formula key"},
        "compression": _STR_OR_NULL,
        "integer_part": _STR_OR_NULL,
        "label_finding": {
            "type": ["object", "null"],
            "description": "the first position label that disagrees with the digits (damage: exit 1); "
            "null when the labels agree, the file has none, or --ignore-labels",
            "required": ["kind", "line", "position", "expected", "found"],
            "properties": {
                "kind": {"enum": ["label-mismatch", "label-missing"]},
                "line": _INT_OR_NULL,
                "byte_offset": _INT_OR_NULL,
                "position": {**_INT_OR_NULL, "description": "first digit of the labelled line"},
                "expected": {**_INT_OR_NULL, "description": "the label the digit count implies"},
                "found": {**_STR_OR_NULL, "description": "the label as written"},
                "total": {"type": "integer", "minimum": 1, "description": "label findings listed"},
                "end": {
                    **_STR_OR_NULL,
                    "description": "which end of its line the label sits at: start or end",
                },
            },
        },
    },
}

_CHECK = {
    "type": "object",
    "required": ["kind", "position", "expected", "found", "match", "base"],
    "properties": {
        "kind": {
            "enum": [
                "tail",
                "head",
                "sample",
                "user",
                "integer-part",
                "bisection",
                "confirm",
                "after",
                "prefix",
                "full",
            ]
        },
        "position": {
            "type": "integer",
            "minimum": 0,
            "description": "1-based position of the window's first digit in `base`; 0 for the integer part",
        },
        "expected": {"type": "string", "description": "certified digits"},
        "found": {"type": "string", "description": "the file's digits"},
        "match": {"type": "boolean"},
        "first_difference": _INT_OR_NULL,
        "note": {"type": "string", "description": "what the row is, in words"},
        "notes": {
            "type": "array",
            "items": _NOTE,
            "description": "the same as codes and numbers: integer-part, window-before-first-wrong, "
            "full-evaluation-compared, wrong-run, hex-from-decimal-prefix, decimal-recomputed, first-of-wrong-runs",
        },
        "base": {"enum": [10, 16]},
        "prefix": {**_INT_OR_NULL, "description": "decimal digits converted, for radix-conversion checks"},
    },
}

_COMMON_REQUIRED = [
    "command",
    "verdict",
    "file",
    "method",
    "checks",
    "seconds",
    "evaluations",
    "interrupted",
    "labels_consistent",
    "exhaustive",
    "covered",
    "repeat",
]
_COMMON = {
    "command": {"enum": ["verify", "locate", "scan"]},
    "verdict": {
        "enum": ["match", "mismatch", "incomplete", "unconfirmed"],
        "description": "match (exit 0): every digit compared agrees; mismatch (exit 1); incomplete: "
        "interrupted before the check finished, no wrong digit in what was compared so far (`covered`, "
        "`checks`: what was established) (exit 130); unconfirmed (locate only, exit 3): "
        "no wrong digit found, but only windows were compared, so isolated damage is not ruled out",
    },
    "file": _FILE,
    "method": {"type": "string"},
    "checks": {"type": "array", "items": _CHECK},
    "seconds": {"type": "number", "minimum": 0},
    "evaluations": {"type": "integer", "minimum": 0},
    "schema_version": {"const": SCHEMA_VERSION},
    "interrupted": {
        "type": "boolean",
        "description": "stopped by Ctrl-C; the report says what was established",
    },
    "labels_consistent": {"type": "boolean", "description": "false when file.label_finding is set"},
    "exhaustive": {
        "type": "boolean",
        "description": "true when every digit under check was compared (with the full computation or, "
        "for decimal files, by radix conversion of the whole file)",
    },
    "covered": {
        "type": "array",
        "description": "digit ranges [first, last] (1-based, in the file's base) that were compared",
        "items": {"type": "array", "items": {"type": "integer", "minimum": 1}, "minItems": 2, "maxItems": 2},
    },
    "covered_digits": {"type": "integer", "minimum": 0, "description": "digits inside `covered`"},
    "warnings": {
        "type": "array",
        "items": {"type": "string"},
        "description": "what went wrong beside the check without changing its answer "
        "(damaged checkpoint records skipped and recomputed, a checkpoint write that failed)",
    },
    "warning_codes": {
        "type": "array",
        "items": _NOTE,
        "description": "the same warnings as codes and numbers, in the same order "
        "(checkpoint-damaged: records, checkpoint; checkpoint-failed: reason)",
    },
    "repeat": {"type": "string", "description": "a command line that repeats the run"},
    "notes": {
        "type": "array",
        "items": {"type": "string"},
        "description": "what the run did otherwise than asked (random windows not drawn because every "
        "digit was compared, fewer distinct windows than asked in a short file), in words",
    },
}

VERIFY_SCHEMA: dict[str, Any] = {
    "type": "object",
    "required": [*_COMMON_REQUIRED, "seed", "window", "false_match_chance", "scattered_bound"],
    "properties": {
        **_COMMON,
        "command": {"const": "verify"},
        "seed": {"type": "integer"},
        "window": {"type": "integer", "minimum": 1},
        "false_match_chance": {"type": "number"},
        "tail_position": _INT_OR_NULL,
        "scattered_bound": {"type": ["number", "null"]},
        "random_windows": {
            "type": "integer",
            "minimum": 0,
            "description": "distinct random windows checked (not the head, tail or --at ones); "
            "scattered_bound is computed from them",
        },
        "samples_asked": {
            "type": ["integer", "null"],
            "minimum": 0,
            "description": "random windows asked for (null: not asked, the default number was sought)",
        },
        "note_codes": {
            "type": "array",
            "items": _NOTE,
            "description": "the same notes as codes and numbers, in the same order (samples-not-drawn: "
            "asked, reference, compared; samples-fewer: asked, drawn_from, unit, given)",
        },
        "sample_room": {
            **_INT_OR_NULL,
            "description": "distinct positions the random windows were drawn from (null: none drawn, "
            "every digit being compared instead)",
        },
        "reference": {
            "enum": ["arb", "mpfr", None],
            "description": "the full computation every digit was compared with, or null (windows only)",
        },
        "wrong_digits": {**_INT_OR_NULL, "description": "wrong digits the full comparison found"},
        "wrong_runs": {**_INT_OR_NULL, "description": "runs of wrong digits the full comparison found"},
        "first_wrong_bracket": {
            "type": ["array", "null"],
            "items": {"type": "integer", "minimum": 1},
            "minItems": 2,
            "maxItems": 2,
            "description": "decimal files: [lo, hi], the first wrong decimal digit lies in lo..hi",
        },
        "rounded_from": {
            **_INT_OR_NULL,
            "description": "the digits from here to the end are the true ones rounded up at the last digit",
        },
    },
}

LOCATE_SCHEMA: dict[str, Any] = {
    "type": "object",
    "required": [*_COMMON_REQUIRED, "first_mismatch", "expected", "found", "how", "explanation"],
    "properties": {
        **_COMMON,
        "command": {"const": "locate"},
        "first_mismatch": {**_INT_OR_NULL, "minimum": 1, "description": "1-based position, or null"},
        "expected": {"type": "string"},
        "found": {"type": "string"},
        "rest": {"enum": ["wrong", "right-again", "mixed", None]},
        "how": {"enum": ["bisection", "scan", "head", "prefix bisection", "none"]},
        "first_is_certain": {"type": "boolean"},
        "explanation": {"type": "string"},
        "scan_estimate_seconds": {"type": ["number", "null"]},
        "rounded_from": {
            **_INT_OR_NULL,
            "description": "decimal files: the digits from here to the end are the true ones rounded up",
        },
        "first_wrong_bracket": {
            "type": ["array", "null"],
            "items": {"type": "integer", "minimum": 1},
            "minItems": 2,
            "maxItems": 2,
            "description": "decimal files: [lo, hi], the first wrong decimal digit lies in lo..hi",
        },
    },
}

_RUN = {
    "type": "object",
    "required": ["start", "length", "wrong", "expected", "found"],
    "properties": {
        "start": {"type": "integer", "minimum": 1},
        "length": {"type": "integer", "minimum": 1},
        "wrong": {"type": "integer", "minimum": 1},
        "expected": {"type": "string"},
        "found": {"type": "string"},
    },
}

SCAN_SCHEMA: dict[str, Any] = {
    "type": "object",
    "required": [*_COMMON_REQUIRED, "reference", "digits_compared", "wrong_digits", "mismatch_runs"],
    "properties": {
        **_COMMON,
        "command": {"const": "scan"},
        "reference": {"enum": ["arb", "mpfr"]},
        "digits_compared": {"type": "integer", "minimum": 0},
        "wrong_digits": {"type": "integer", "minimum": 0},
        "first_mismatch": _INT_OR_NULL,
        "mismatch_runs": {"type": "array", "items": _RUN},
        "mismatch_runs_total": {"type": "integer", "minimum": 0},
        "rounded_from": {
            **_INT_OR_NULL,
            "description": "the digits from here to the end are the true ones rounded up at the last digit",
        },
    },
}

REPORT_SCHEMA: dict[str, Any] = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "spotcheck check report",
    "schema_version": SCHEMA_VERSION,
    "oneOf": [VERIFY_SCHEMA, LOCATE_SCHEMA, SCAN_SCHEMA],
}

# --- compare (``spotcheck compare A B --json``): a report of its own -------------
_COPY = {
    "type": "object",
    "required": ["path", "size_bytes", "base", "count", "layout"],
    "properties": {
        "path": {"type": "string"},
        "size_bytes": {"type": "integer", "minimum": 0},
        "compression": _STR_OR_NULL,
        "base": {"enum": [10, 16]},
        "count": {"type": "integer", "minimum": 0, "description": "digits after the point"},
        "integer_part": _STR_OR_NULL,
        "layout": {"type": "string", "description": "short description of the layout"},
        "label_finding": _FILE["properties"]["label_finding"],  # type: ignore[index]
    },
}

_RIGHT = {
    "enum": ["A", "B", "both wrong", None],
    "description": "which copy agrees with the certified digits",
}

_DIFF_RUN = {
    "type": "object",
    "required": ["start", "length", "differing", "a", "b", "right"],
    "properties": {
        "start": {
            "type": "integer",
            "minimum": 1,
            "description": "1-based position of the run's first digit",
        },
        "length": {"type": "integer", "minimum": 1},
        "differing": {
            "type": "integer",
            "minimum": 1,
            "description": "positions in the run where the copies differ",
        },
        "a": {"type": "string", "description": "copy A's digits from start"},
        "b": {"type": "string", "description": "copy B's digits from start"},
        "certified": {**_STR_OR_NULL, "description": "certified digits from start (hex files)"},
        "right": _RIGHT,
        "note": {"type": "string", "description": "the notes in words, `; ` between them"},
        "notes": {
            "type": "array",
            "items": _NOTE,
            "description": "shifted, not-arbitrated-beyond-limit, not-arbitrated-after-unresolved, "
            "not-arbitrated-memory, prefixes-converted, run-partly-checked",
        },
    },
}

COMPARE_SCHEMA: dict[str, Any] = {
    "type": "object",
    "required": [
        "command",
        "verdict",
        "schema_version",
        "a",
        "b",
        "base",
        "constant",
        "method",
        "digits_compared",
        "differing_digits",
        "runs",
        "runs_total",
        "extra",
        "keep",
        "seconds",
        "evaluations",
        "interrupted",
        "repeat",
    ],
    "properties": {
        "command": {"const": "compare"},
        "verdict": {"enum": ["identical", "differ", "incomplete"]},
        "schema_version": {"const": SCHEMA_VERSION},
        "a": _COPY,
        "b": _COPY,
        "base": {"enum": [10, 16]},
        "constant": _STR_OR_NULL,
        "constant_how": {"type": "string"},
        "method": {"enum": ["digit extraction", "radix conversion", "full evaluation", "none"]},
        "digits_compared": {
            "type": "integer",
            "minimum": 0,
            "description": "positions both copies have, compared",
        },
        "differing_digits": {"type": "integer", "minimum": 0},
        "runs": {"type": "array", "items": _DIFF_RUN, "description": "the first runs (all, up to 1000)"},
        "runs_total": {"type": "integer", "minimum": 0},
        "extra": {
            "type": ["object", "null"],
            "required": ["longer", "start", "length", "digits", "right"],
            "properties": {
                "longer": {"enum": ["A", "B"]},
                "start": {"type": "integer", "minimum": 1},
                "length": {"type": "integer", "minimum": 1},
                "digits": {"type": "string"},
                "certified": _STR_OR_NULL,
                "right": {"type": ["boolean", "null"]},
                "note": {"type": "string", "description": "the notes in words"},
                "notes": {
                    "type": "array",
                    "items": _NOTE,
                    "description": "extra-ends-checked, extra-all-checked, not-arbitrated-after-unresolved, "
                    "not-arbitrated-memory, prefixes-converted",
                },
            },
        },
        "integer_parts": {
            "type": ["object", "null"],
            "properties": {
                "a": {"type": "string"},
                "b": {"type": "string"},
                "certified": _STR_OR_NULL,
                "right": _RIGHT,
            },
        },
        "shift": {
            "type": ["object", "null"],
            "description": "one copy lost digits: where, how many, which copy; the comparison stops there",
            "properties": {
                "position": {"type": "integer", "minimum": 1},
                "digits": {"type": "integer", "minimum": 1},
                "missing_in": {"enum": ["A", "B"]},
            },
        },
        "keep": {
            "enum": ["A", "B", "either", "neither", None],
            "description": "the copy to keep; null when not every difference could be arbitrated",
        },
        "seconds": {"type": "number", "minimum": 0},
        "arbitration_seconds": {"type": "array", "items": {"type": "number", "minimum": 0}},
        "evaluations": {"type": "integer", "minimum": 0},
        "interrupted": {"type": "boolean"},
        "labels_consistent": {
            "type": "boolean",
            "description": "false when a copy's label_finding is set (exit 1 even when the digits are identical)",
        },
        "repeat": {"type": "string"},
    },
}

# `spotcheck schema` prints REPORT_SCHEMA: a compare report is one of its kinds.
REPORT_SCHEMA["oneOf"].append(COMPARE_SCHEMA)
