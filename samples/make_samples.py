"""Make the demo digit files in samples/ (run: python samples/make_samples.py).

The scenario (invented for these demos): the Ridgeview Community College
mathematics club kept digit files of constants on an old tape library.  When the
tapes were copied to disk in 2026, some copies came back damaged, and one file
had been produced years earlier by a club computation that went astray.

True digits come from gmpy2/MPFR, independently of spotcheck's engine; the
damage is deterministic, so running this script again gives the same bytes.
"""

from __future__ import annotations

import gzip
import io
from pathlib import Path

import gmpy2

HERE = Path(__file__).resolve().parent
HEX = "0123456789ABCDEF"


def fraction_digits(value_of, base: int, n: int) -> tuple[str, str]:
    """(integer part, first n digits after the point) of an MPFR constant."""
    bits = int(n * (4 if base == 16 else 3.33)) + 128
    with gmpy2.context(precision=bits):
        x = value_of()
        v = gmpy2.mpz(gmpy2.floor(x * gmpy2.mpz(base) ** n))
    whole, frac = divmod(v, gmpy2.mpz(base) ** n)
    return whole.digits(base).upper(), frac.digits(base).upper().zfill(n)


def lines(digits: str, per_line: int, group: int = 0) -> list[str]:
    out = []
    for i in range(0, len(digits), per_line):
        chunk = digits[i : i + per_line]
        if group:
            chunk = " ".join(chunk[j : j + group] for j in range(0, len(chunk), group))
        out.append(chunk)
    return out


def altered(digit: str, base: int, k: int) -> str:
    """A different digit, chosen deterministically from k."""
    return (HEX[:base])[(HEX.index(digit) + 1 + (k * 7919) % (base - 1)) % base]


def files() -> dict[str, bytes]:
    out: dict[str, bytes] = {}
    ip, pi_hex = fraction_digits(gmpy2.const_pi, 16, 50_000)
    header = [
        "# Ridgeview Community College mathematics club - digit archive",
        "# pi, hexadecimal, copied from tape RCC-07 in 2026",
    ]
    body = [f"{ip}." + pi_hex[:64]] + lines(pi_hex[64:], 64)
    out["pi-hex-clean.txt"] = ("\n".join(header + body) + "\n").encode()

    # A club run that went astray: from position 37,123 on every digit is wrong.
    start = 37_123
    bad = pi_hex[: start - 1] + "".join(altered(c, 16, i) for i, c in enumerate(pi_hex[start - 1 :]))
    body = [f"{ip}." + bad[:64]] + lines(bad[64:], 64)
    hdr = ["# Ridgeview club run 'long-night-3' (1990s), hexadecimal pi"]
    out["pi-hex-astray.txt"] = ("\n".join(hdr + body) + "\n").encode()

    # Tape damage: three isolated digits changed, stored gzip-compressed,
    # grouped in tens with a running digit count at the end of each line.
    rot = list(pi_hex[:40_000])
    for k, p in enumerate((2_718, 16_180, 31_416)):
        rot[p - 1] = altered(rot[p - 1], 16, k)
    rotted = "".join(rot)
    text = [f"{ip}."] + [
        f"{line} : {min((i + 1) * 60, len(rotted))}" for i, line in enumerate(lines(rotted, 60, 10))
    ]
    buf = io.BytesIO()
    with gzip.GzipFile(fileobj=buf, mode="wb", mtime=0) as gz:
        gz.write(("\n".join(text) + "\n").encode())
    out["pi-hex-taperot.txt.gz"] = buf.getvalue()

    # Decimal pi, grouped in tens, fifty digits a line, position labels at the start.
    ip10, pi_dec = fraction_digits(gmpy2.const_pi, 10, 30_000)
    text = ["Ridgeview club - pi to 30,000 decimal places", "", f"{ip10}."]
    text += [f"{i * 50:>6}: {line}" for i, line in enumerate(lines(pi_dec, 50, 10))]
    out["pi-decimal.txt"] = ("\n".join(text) + "\n").encode()

    # Decimal pi with one digit flipped (a single bad byte on the tape).
    flip = 12_345
    dec_bad = pi_dec[: flip - 1] + altered(pi_dec[flip - 1], 10, 3) + pi_dec[flip:]
    out["pi-decimal-flipped.txt"] = ("3." + "\n".join(lines(dec_bad, 100)) + "\n").encode()

    # log 2 in hex, lower case, no integer part.
    _, log2_hex = fraction_digits(gmpy2.const_log2, 16, 20_000)
    out["log2-hex.txt"] = ("\n".join(lines(log2_hex.lower(), 80)) + "\n").encode()

    # The club's web mirror of log2-hex.txt: re-laid out (upper case, groups of
    # eight, 72 digits a line, gzip) and damaged in transit: a burst of six
    # wrong digits and one flipped digit.  `spotcheck compare` arbitrates.
    mirror = list(log2_hex)
    for k, p in enumerate(range(7_001, 7_007)):
        mirror[p - 1] = altered(mirror[p - 1], 16, k)
    mirror[15_550 - 1] = altered(mirror[15_550 - 1], 16, 9)
    text = ["# Ridgeview club web mirror: log 2, hexadecimal"] + lines("".join(mirror), 72, 8)
    buf = io.BytesIO()
    with gzip.GzipFile(fileobj=buf, mode="wb", mtime=0) as gz:
        gz.write(("\n".join(text) + "\n").encode())
    out["log2-hex-mirror.txt.gz"] = buf.getvalue()

    # e in decimal from the club's 1970s punched-card archive (no BBP-type
    # formula: spotcheck evaluates e in full to check it).
    ipe, e_dec = fraction_digits(lambda: gmpy2.exp(1), 10, 20_000)
    text = ["# Ridgeview club card archive: e to 20,000 decimal places", f"{ipe}."] + lines(e_dec, 100, 10)
    out["e-decimal.txt"] = ("\n".join(text) + "\n").encode()

    # A stretch from deep in pi: the club's 1,000,000-digit run was kept as parts, and a member
    # kept the second one, digits 1,000,001 to 1,004,096, each line labelled with the position of
    # its first digit.  A tape copy of the same part lost its labels and one digit was changed.
    deep, length = 1_000_001, 4_096
    _, pi_deep = fraction_digits(gmpy2.const_pi, 16, deep - 1 + length)
    part = pi_deep[deep - 1 :]
    text = ["# Ridgeview club run 'long-night-5', part 2 of pi in hexadecimal"]
    text += [f"{deep + 64 * i}: {line}" for i, line in enumerate(lines(part, 64))]
    out["pi-hex-part2.txt"] = ("\n".join(text) + "\n").encode()
    hit = 2_500  # digit 1,002,500 of pi
    copy = part[: hit - 1] + altered(part[hit - 1], 16, 4) + part[hit:]
    out["pi-hex-part2-tapecopy.txt"] = ("\n".join(lines(copy, 64)) + "\n").encode()

    # Catalan's constant in hex, one damaged digit.
    ipc, cat_hex = fraction_digits(gmpy2.const_catalan, 16, 20_000)
    cat = cat_hex[:9_999] + altered(cat_hex[9_999], 16, 5) + cat_hex[10_000:]
    out["catalan-hex-damaged.txt"] = (f"{ipc}." + "\n".join(lines(cat, 100)) + "\n").encode()
    return out


def main(directory: Path = HERE) -> None:
    for name, data in files().items():
        (directory / name).write_bytes(data)
        print(f"wrote {directory / name} ({len(data):,} bytes)")


if __name__ == "__main__":
    main()
