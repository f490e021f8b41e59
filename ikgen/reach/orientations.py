"""Tool orientations of a reach map: named sets and rotation files.

Named sets (``orientation_sets``, documented in docs/reach.md), comma-separated:

- ``down:STEP``: the tool's z axis straight down (world -z), turned about the vertical every
  STEP degrees from 0: R = Rz(yaw) Rx(180 deg), so the tool's x axis points at heading ``yaw``;
- ``level:STEP``: the tool's z axis horizontal, pointing at heading 0, STEP, ... degrees, its x
  axis straight down: R = Rz(heading) Ry(90 deg);
- ``tilt:ANGLE:STEP``: the tool's z axis ANGLE degrees from straight down, leaning towards
  heading 0, STEP, ...: R = Rz(heading) Ry(-ANGLE) Rx(180 deg);
- ``fixed:A:B:C``: one rotation by fixed-axis angles in degrees, R = Rz(C) Ry(B) Rx(A) (the
  angles ``ikgen forward`` prints, in degrees).

Headings are measured in the world frame from +x towards +y. Every pose is the tool frame in
the world frame, as the generated solvers take it.

A rotation file (``read_rotation_file``) lists named unit quaternions instead.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..errors import PATH_LIMIT, IkgenError, clip, quote
from ..exact import plain_decimal
from ..files import Unreadable, read_limited

MAX_ORIENTATIONS = 1000                 # orientations in one map (named sets and files alike)
ROTATION_FILE_LIMIT = 1 << 20           # bytes of a rotation file
NAME_LIMIT = 40                         # characters of an orientation's name
UNIT_TOLERANCE = 1e-3                   # how far from 1 a quaternion's length may be (then normalised)
SET_HELP = "down:STEP, level:STEP, tilt:ANGLE:STEP or fixed:A:B:C (degrees)"


# --------------------------------------------------------------------- named orientation sets

def _rz(angle: float) -> np.ndarray:
    c, s = _cos_sin(angle)
    return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])


def _ry(angle: float) -> np.ndarray:
    c, s = _cos_sin(angle)
    return np.array([[c, 0.0, s], [0.0, 1.0, 0.0], [-s, 0.0, c]])


def _rx(angle: float) -> np.ndarray:
    c, s = _cos_sin(angle)
    return np.array([[1.0, 0.0, 0.0], [0.0, c, -s], [0.0, s, c]])


def _cos_sin(degrees: float) -> tuple[float, float]:
    """cos and sin of an angle in degrees, exact at multiples of 90 degrees (so that 'straight
    down' is exactly vertical, not off by 6e-17)."""
    quarter, rest = divmod(degrees, 90.0)
    if rest == 0.0:
        return ((1.0, 0.0), (0.0, 1.0), (-1.0, 0.0), (0.0, -1.0))[int(quarter) % 4]
    radians = math.radians(degrees)
    return math.cos(radians), math.sin(radians)


def headings(step: float) -> list[float]:
    """0, step, 2 step, ... below 360 degrees."""
    return [k * step for k in range(int(math.ceil(360.0 / step - 1e-9)))]


def _number(word: str) -> str:
    """A degree value as a short name part: 30 for 30.0, 22.5 for 22.5."""
    return f"{word:g}"


def orientation_sets(text: str) -> tuple[np.ndarray, tuple[str, ...]]:
    """The rotations and names of comma-separated named sets (see the module docstring)."""
    rotations, names = [], []
    for item in text.split(","):
        for name, rotation in _one_set(item.strip()):
            rotations.append(rotation)
            names.append(name)
            if len(names) > MAX_ORIENTATIONS:
                raise IkgenError(f"orientation sets {quote(text)}: more than {MAX_ORIENTATIONS:,} orientations; "
                                 "expected fewer (a larger STEP)")
    return np.array(rotations), tuple(names)


def _one_set(item: str) -> list[tuple[str, np.ndarray]]:
    kind, *words = item.split(":")
    arity = {"down": (0, 1), "level": (0, 1), "tilt": (0, 2), "fixed": (3, 3)}
    if kind not in arity:
        raise IkgenError(f"orientation set {quote(item)}: unknown set {quote(kind)}; expected {SET_HELP}")
    least, most = arity[kind]
    if not least <= len(words) <= most:
        raise IkgenError(f"orientation set {quote(item)}: {len(words)} number(s) after {quote(kind)}; "
                         f"expected {SET_HELP}")
    values = [_degrees(word, item) for word in words]
    if kind == "fixed":
        a, b, c = values
        return [(f"fixed {_number(a)} {_number(b)} {_number(c)}", _rz(c) @ _ry(b) @ _rx(a))]
    if kind == "tilt":
        angle, step = (values + [30.0, 90.0][len(values):])
    else:
        step = values[0] if values else 90.0
    step = _step(step, item)
    if kind == "down":
        return [(f"down yaw {_number(h)}", _rz(h) @ _rx(180.0)) for h in headings(step)]
    if kind == "level":
        return [(f"level heading {_number(h)}", _rz(h) @ _ry(90.0)) for h in headings(step)]
    if not 0.0 <= angle <= 180.0:
        raise IkgenError(f"orientation set {quote(item)}: tilt {_number(angle)} deg; expected 0 to 180 degrees")
    return [(f"tilt {_number(angle)} heading {_number(h)}", _rz(h) @ _ry(-angle) @ _rx(180.0))
            for h in headings(step)]


def _degrees(word: str, item: str) -> float:
    value = plain_decimal(word)
    if value is None or not math.isfinite(value):
        raise IkgenError(f"orientation set {quote(item)}: {quote(word)} is not a finite number; "
                         f"expected degrees such as 30 or 22.5")
    return value


def _step(value: float, item: str) -> float:
    if not 0.0 < value <= 360.0:
        raise IkgenError(f"orientation set {quote(item)}: step {_number(value)} deg; expected more than 0 "
                         "and at most 360 degrees")
    return value


# ----------------------------------------------------------------------------- rotation files

def read_rotation_file(path: str | Path) -> tuple[np.ndarray, tuple[str, ...]]:
    """Rotations from a file of our own (docs/reach.md): a header ``name, qw, qx, qy, qz`` then
    one orientation per line, a name and a unit quaternion (scalar first, Hamilton convention,
    the tool frame in the world frame, as in path files). '#' starts a comment."""
    shown = clip(str(path), PATH_LIMIT)
    try:
        data = read_limited(path, ROTATION_FILE_LIMIT, "rotation file")
        text = data.decode("utf-8-sig")
    except Unreadable as exc:
        raise IkgenError(f"{shown}: {exc.problem}; expected {exc.expected}") from None
    except UnicodeDecodeError as exc:
        raise IkgenError(f"{shown}: byte {exc.start + 1} is not UTF-8 text; expected a UTF-8 text file") from None
    return parse_rotations(text, shown)


def parse_rotations(text: str, shown: str = "<rotations>") -> tuple[np.ndarray, tuple[str, ...]]:
    from ..path import quaternion_matrix
    rotations, names, header = [], [], None
    for number, raw in enumerate(text.splitlines(), 1):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        fields = [field.strip() for field in line.split(",")]
        if header is None:
            if [f.lower() for f in fields] != ["name", "qw", "qx", "qy", "qz"]:
                raise IkgenError(f"{shown}:{number}: header {quote(line)}; expected the columns "
                                 "'name, qw, qx, qy, qz'")
            header = fields
            continue
        name, quaternion = _rotation_row(fields, shown, number, names)
        if len(names) == MAX_ORIENTATIONS:
            raise IkgenError(f"{shown}:{number}: more than {MAX_ORIENTATIONS:,} rotations; expected fewer")
        rotations.append(quaternion_matrix(quaternion))
        names.append(name)
    if not names:
        raise IkgenError(f"{shown}: no rotation found; expected a header 'name, qw, qx, qy, qz' and at least one row")
    return np.array(rotations), tuple(names)


def _rotation_row(fields: list[str], shown: str, number: int, names: list[str]) -> tuple[str, np.ndarray]:
    if len(fields) != 5:
        raise IkgenError(f"{shown}:{number}: {len(fields)} fields; expected 5 (name, qw, qx, qy, qz)")
    name = fields[0]
    if not name or len(name) > NAME_LIMIT or not name.isprintable() or '"' in name:
        raise IkgenError(f"{shown}:{number}: name {quote(name)}; expected 1 to {NAME_LIMIT} printable characters "
                         "without quotes or commas")
    if name in names:
        raise IkgenError(f"{shown}:{number}: the name {quote(name)} is used twice; expected a name per rotation")
    values = []
    for column, word in zip(("qw", "qx", "qy", "qz"), fields[1:]):
        value = plain_decimal(word)
        if value is None or not math.isfinite(value):
            raise IkgenError(f"{shown}:{number}: column {column}: {quote(word)}; expected a finite decimal number")
        values.append(value)
    length = math.sqrt(sum(v * v for v in values))
    if abs(length - 1.0) > UNIT_TOLERANCE:
        raise IkgenError(f"{shown}:{number}: the quaternion's length is {length:.6g}; expected 1 within "
                         f"{UNIT_TOLERANCE:g} (a unit quaternion, scalar first)")
    return name, np.array(values) / length
