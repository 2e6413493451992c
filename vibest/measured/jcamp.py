"""JCAMP-DX infrared files (R. S. McDonald, P. A. Wilks, Appl. Spectrosc. 42, 151 (1988);
IUPAC JCAMP-DX 4.24 and 5.01): reading and writing.

Read: XYDATA=(X++(Y..Y)) in AFFN and ASDF (SQZ, DIF, DUP) forms, XYPOINTS / PEAK TABLE=(XY..XY),
XFACTOR/YFACTOR, FIRSTX/LASTX/DELTAX/NPOINTS checks, inline ``$$`` comments, DOS end-of-file
characters, several blocks (LINK files: choose one with ``block``). Written: (X++(Y..Y)) AFFN.
Every problem is an :class:`InputError` naming the file and line.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError

_SQZ = {"@": 0, **{c: i + 1 for i, c in enumerate("ABCDEFGHI")}, **{c: -(i + 1) for i, c in enumerate("abcdefghi")}}
_DIF = {"%": 0, **{c: i + 1 for i, c in enumerate("JKLMNOPQR")}, **{c: -(i + 1) for i, c in enumerate("jklmnopqr")}}
_DUP = {**{c: i + 1 for i, c in enumerate("STUVWXYZ")}, "s": 9}
_AFFN = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]\d+)?")
_DIGITS = re.compile(r"\d*\.?\d*")


@dataclass
class JcampBlock:
    """One data block: header labels (normalised names -> raw text) and decoded data."""

    labels: dict[str, str] = field(default_factory=dict)
    x: np.ndarray | None = None
    y: np.ndarray | None = None
    data_line: int = 0
    form: str = ""

    def title(self) -> str:
        return self.labels.get("TITLE", "").strip()


def normalise_label(label: str) -> str:
    """Label names compare without spaces, dashes, slashes and underscores, in upper case (spec 4.24)."""
    return re.sub(r"[\s\-/_]", "", label).upper()


class _Fail:
    def __init__(self, path: str):
        self.path = path

    def __call__(self, line: int, message: str) -> InputError:
        return InputError(f"{self.path}:{line}: {message}")


def _tokens(text: str, where: tuple[_Fail, int]) -> list[tuple[str, float]]:
    """Split one data line into ('abs'|'dif'|'dup', value) tokens."""
    fail, lineno = where
    out: list[tuple[str, float]] = []
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if c in " \t,;":
            i += 1
            continue
        if c == "?":
            out.append(("abs", math.nan))
            i += 1
            continue
        if c.isdigit() or c in "+-.":
            m = _AFFN.match(text, i)
            if not m:
                raise fail(lineno, f"cannot read number at {text[i:i + 12]!r}")
            out.append(("abs", float(m.group(0))))
            i = m.end()
            continue
        for table, kind in ((_SQZ, "abs"), (_DIF, "dif"), (_DUP, "dup")):
            if c in table:
                m = _DIGITS.match(text, i + 1)
                rest = m.group(0)
                digit = table[c]
                if kind == "dup":
                    if "." in rest:
                        raise fail(lineno, f"bad repeat count at {text[i:i + 8]!r}")
                    out.append(("dup", float(int(f"{digit}{rest}"))))
                else:
                    mag = float(f"{abs(digit)}{rest}") if rest not in ("", ".") else float(abs(digit))
                    out.append((kind, math.copysign(mag, digit) if digit != 0 else mag))
                i = m.end()
                break
        else:
            raise fail(lineno, f"unexpected character {c!r} in data")
    return out


def _expand(tokens: list[tuple[str, float]], fail: _Fail, lineno: int) -> tuple[list[float], bool]:
    """Values of one line; True when the line ended in difference form."""
    vals: list[float] = []
    last_kind, last_dif = "abs", 0.0
    for kind, v in tokens:
        if kind == "abs":
            vals.append(v)
            last_kind = "abs"
        elif kind == "dif":
            if not vals:
                raise fail(lineno, "difference value without a preceding value")
            vals.append(vals[-1] + v)
            last_kind, last_dif = "dif", v
        else:  # dup
            if not vals:
                raise fail(lineno, "repeat count without a preceding value")
            for _ in range(int(v) - 1):
                vals.append(vals[-1] + last_dif if last_kind == "dif" else vals[-1])
    return vals, last_kind == "dif"


def _float_label(block: JcampBlock, name: str, fail: _Fail, default: float | None = None) -> float | None:
    raw = block.labels.get(name)
    if raw is None or not raw.strip():
        return default
    try:
        return float(raw.split()[0].replace(",", "."))
    except ValueError:
        raise fail(block.data_line, f"##{name}= {raw.strip()!r} is not a number") from None


def _decode_xy_y(lines: list[tuple[int, str]], block: JcampBlock, fail: _Fail) -> None:
    """(X++(Y..Y)): X then Y values per line; a DIF line's last Y is repeated as the next line's check."""
    xfac = _float_label(block, "XFACTOR", fail, 1.0)
    yfac = _float_label(block, "YFACTOR", fail, 1.0)
    line_x: list[float] = []
    ys: list[float] = []
    pending_check = False
    for lineno, text in lines:
        toks = _tokens(text, (fail, lineno))
        if not toks:
            continue
        if toks[0][0] != "abs":
            raise fail(lineno, "a data line must start with an X value")
        x0 = toks[0][1]
        vals, ends_dif = _expand(toks[1:], fail, lineno)
        if pending_check and vals:
            if not math.isclose(vals[0], ys[-1], rel_tol=1e-6, abs_tol=1e-6):
                raise fail(lineno, f"Y check value {vals[0]:g} differs from the previous line's last value {ys[-1]:g}")
            vals = vals[1:]
        line_x.append(x0)
        ys.extend(vals)
        pending_check = ends_dif
    if not ys:
        raise fail(block.data_line, "no data values in XYDATA")
    n = len(ys)
    npoints = _float_label(block, "NPOINTS", fail)
    firstx = _float_label(block, "FIRSTX", fail)
    lastx = _float_label(block, "LASTX", fail)
    if npoints is not None and int(npoints) != n:
        raise fail(lines[-1][0], f"##NPOINTS= {int(npoints)} but the data hold {n} values (truncated or damaged file?)")
    if firstx is None:
        firstx = line_x[0] * xfac
    if lastx is None:
        deltax = _float_label(block, "DELTAX", fail)
        if deltax is None:
            raise fail(block.data_line, "neither ##LASTX= nor ##DELTAX= given: X values cannot be placed")
        lastx = firstx + deltax * (n - 1)
    x = np.linspace(firstx, lastx, n) if n > 1 else np.array([firstx])
    step = (lastx - firstx) / (n - 1) if n > 1 else 1.0
    if abs(line_x[0] * xfac - firstx) > max(abs(step), 1e-9) * 1.01 + 1e-6 * abs(firstx):
        raise fail(block.data_line + 1, f"first X {line_x[0] * xfac:g} does not match ##FIRSTX= {firstx:g}")
    block.x = x
    block.y = np.asarray(ys) * yfac
    block.form = "XYDATA"


def _decode_xy_pairs(lines: list[tuple[int, str]], block: JcampBlock, fail: _Fail) -> None:
    xfac = _float_label(block, "XFACTOR", fail, 1.0)
    yfac = _float_label(block, "YFACTOR", fail, 1.0)
    nums: list[float] = []
    for lineno, text in lines:
        vals, _ = _expand(_tokens(text, (fail, lineno)), fail, lineno)
        nums.extend(vals)
    if len(nums) % 2:
        raise fail(lines[-1][0] if lines else block.data_line, "X,Y pairs are incomplete")
    if not nums:
        raise fail(block.data_line, "no data pairs")
    arr = np.asarray(nums).reshape(-1, 2)
    npoints = _float_label(block, "NPOINTS", fail)
    if npoints is not None and int(npoints) != len(arr):
        raise fail(lines[-1][0], f"##NPOINTS= {int(npoints)} but the data hold {len(arr)} pairs")
    block.x = arr[:, 0] * xfac
    block.y = arr[:, 1] * yfac
    block.form = "XYPOINTS"


def parse_jcamp(text: str, path: str = "<text>") -> list[JcampBlock]:
    """All data-bearing blocks of a JCAMP-DX text, in file order."""
    fail = _Fail(path)
    text = text.replace("\x1a", "")
    blocks: list[JcampBlock] = []
    stack: list[JcampBlock] = []
    current_data: tuple[str, int] | None = None
    data_lines: list[tuple[int, str]] = []

    def flush():
        nonlocal current_data, data_lines
        if current_data is not None and stack:
            form, _ = current_data
            blk = stack[-1]
            if form == "xyy":
                _decode_xy_y(data_lines, blk, fail)
            else:
                _decode_xy_pairs(data_lines, blk, fail)
            blocks.append(blk)
        current_data, data_lines = None, []

    last_label = None
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("$$", 1)[0].rstrip()
        if not line.strip():
            continue
        if line.lstrip().startswith("##"):
            flush()
            body = line.lstrip()[2:]
            if "=" not in body:
                raise fail(lineno, f"header line without '=': {raw.strip()[:40]!r}")
            name, value = body.split("=", 1)
            name = normalise_label(name)
            last_label = name
            if name == "TITLE":
                stack.append(JcampBlock(labels={"TITLE": value}, data_line=lineno))
                continue
            if not stack:
                raise fail(lineno, "data or labels before the first ##TITLE=")
            if name == "END":
                stack.pop()
                continue
            stack[-1].labels[name] = value
            if name in ("XYDATA", "XYPOINTS", "PEAKTABLE"):
                form = normalise_label(value)
                stack[-1].data_line = lineno
                if form == "(X++(Y..Y))":
                    current_data = ("xyy", lineno)
                elif form in ("(XY..XY)", "(XYXY)"):
                    current_data = ("pairs", lineno)
                elif name == "PEAKTABLE" and form in ("(XYW..XYW)", "(XYM..XYM)"):
                    raise fail(lineno, f"peak table form {value.strip()} is not supported; give a full spectrum")
                else:
                    raise fail(lineno, f"data form {value.strip()!r} is not supported")
        else:
            if current_data is None:
                if last_label is not None and stack:
                    # continuation of a multi-line label value
                    stack[-1].labels[last_label] = stack[-1].labels.get(last_label, "") + "\n" + line
                    continue
                raise fail(lineno, "text outside any label")
            data_lines.append((lineno, line))
    flush()
    if not blocks:
        raise InputError(f"{path}: no spectrum data (##XYDATA= or ##XYPOINTS=) found")
    return blocks


def read_jcamp(path: str | Path, block: int | None = None, data: bytes | None = None) -> JcampBlock:
    """The one data block of a JCAMP-DX file, or block number ``block`` (1-based) of several
    (``data``: the file's bytes when already read)."""
    from ..files import read_limited

    if data is None:
        data = read_limited(path, MAX_SPECTRUM_BYTES, "spectrum file")
    text = data.decode("latin-1")
    if not text.strip():
        raise InputError(f"{path}: the file is empty")
    blocks = parse_jcamp(text, str(path))
    if block is None:
        if len(blocks) > 1:
            names = "; ".join(f"{k + 1}: {b.title() or 'untitled'}" for k, b in enumerate(blocks))
            raise InputError(f"{path} holds {len(blocks)} spectra ({names}); choose one with --block N")
        return blocks[0]
    if not 1 <= block <= len(blocks):
        raise InputError(f"{path}: block {block} does not exist (the file holds {len(blocks)})")
    return blocks[block - 1]


#: Largest spectrum file read (bytes): a JCAMP-DX or CSV spectrum of a million points is ~30 MB.
MAX_SPECTRUM_BYTES = 50_000_000


def write_jcamp(path: str | Path, wavenumbers_cm1, values, title: str, yunits: str = "ABSORBANCE",
                extra_labels: dict[str, str] | None = None, per_line: int = 8) -> None:
    """Write an evenly spaced spectrum as JCAMP-DX 4.24, XYDATA=(X++(Y..Y)) in AFFN."""
    x = np.asarray(wavenumbers_cm1, dtype=float)
    y = np.asarray(values, dtype=float)
    if len(x) < 2 or len(x) != len(y):
        raise ValueError("need at least two points and as many Y as X values")
    step = np.diff(x)
    if not np.allclose(step, step[0], rtol=1e-6, atol=1e-9):
        raise ValueError("JCAMP-DX (X++(Y..Y)) needs evenly spaced X")
    yfac = max(np.abs(y).max(), 1e-300) / 1e9
    ints = np.round(y / yfac).astype(np.int64)
    lines = [f"##TITLE={title}", "##JCAMP-DX=4.24", "##DATA TYPE=INFRARED SPECTRUM", "##ORIGIN=vibest",
             "##OWNER=vibest user"]
    for k, v in (extra_labels or {}).items():
        lines.append(f"##{k}={v}")
    lines += ["##XUNITS=1/CM", f"##YUNITS={yunits}", "##XFACTOR=1", f"##YFACTOR={yfac:.10g}",
              f"##FIRSTX={x[0]:.6f}", f"##LASTX={x[-1]:.6f}", f"##DELTAX={step[0]:.6f}",
              f"##MINY={y.min():.8g}", f"##MAXY={y.max():.8g}", f"##NPOINTS={len(x)}",
              f"##FIRSTY={y[0]:.8g}", "##XYDATA=(X++(Y..Y))"]
    for start in range(0, len(x), per_line):
        chunk = ints[start:start + per_line]
        lines.append(f"{x[start]:.4f} " + " ".join(str(int(v)) for v in chunk))
    lines.append("##END=")
    Path(path).write_text("\n".join(lines) + "\n")
