"""Reading and validating arm description files (TOML or JSON, one schema).

The schema is documented in docs/arm-file.md. Every problem becomes an ``ArmFileError`` that
names the file, the line when it can be found, the place (joint index and name, field), what
was found and what was expected; an unknown key suggests the closest known one.

Sizes are bounded so that every number the derivation meets is a finite double far from
overflow (lengths within 1 km, angles within 100 turns, see ``LENGTH_LIMITS`` and
``ANGLE_LIMITS``), the number of solutions per pose stays countable
(``MAX_EQUIVALENT_READINGS``), and the file itself is small (``ARM_FILE_LIMIT``).
"""

from __future__ import annotations

import difflib
import hashlib
import json
import math
import re
import tomllib
from pathlib import Path

import sympy as sp

from .errors import ArmFileError, clip, quote
from .exact import NotANumber, parse_exact, snap_radians
from .files import Unreadable, read_limited
from .model import ANGLE_UNITS, CONVENTIONS, JOINT_KINDS, LENGTH_UNITS, TARGET_KINDS, Arm, Joint, Target
from .rotations import from_axis_angles, from_quaternion, homogeneous

CONVENTION_ALIASES = {"standard": "standard", "distal": "standard",
                      "modified": "modified", "proximal": "modified"}
TOP_KEYS = ("arm", "joint", "base", "tool", "target")
TARGET_KEYS = ("kind", "axis", "tool_axis", "given_joint")
ARM_KEYS = ("name", "description", "convention", "length_unit", "angle_unit")
JOINT_KEYS = ("name", "type", "a", "alpha", "d", "theta", "offset", "direction", "limits")
FRAME_KEYS = ("translation", "rotation")
ROTATION_KEYS = ("axes", "frame", "angles", "quaternion", "order", "matrix")
QUATERNION_ORDERS = ("wxyz", "xyzw")
UNIT_TOLERANCE = 1e-6  # how far from 1 a quaternion's norm (or a matrix's columns) may be

MAX_NAME = 64                  # characters of an arm or joint name
MAX_DESCRIPTION = 1000         # characters of the description (it is copied into every output)
ARM_FILE_LIMIT = 1 << 20       # bytes of an arm file (1 MiB; the demo arms have about 2 KiB)
# Magnitude bounds, in the file's units: 1 km of length (no arm is longer, and squares of sums of
# such lengths stay far from overflow, also in float), 100 turns of angle, and 10 for the plain
# numbers of quaternions and rotation matrices (a unit quaternion's are at most 1).
LENGTH_LIMITS = {"m": sp.Integer(1000), "mm": sp.Integer(1_000_000)}
ANGLE_LIMITS = {"deg": sp.Integer(36_000), "rad": 200 * sp.pi}
PLAIN_LIMIT = sp.Integer(10)
# Every closed-form solution comes back once per combination of equivalent readings of the
# joints whose limits exceed a turn; beyond this product the solver's output is not usable.
MAX_EQUIVALENT_READINGS = 1000


def load_arm(path: str | Path) -> Arm:
    """Read, validate and return the arm described in ``path`` (.toml or .json)."""
    path = Path(path)
    shown = str(path)
    try:
        raw = read_limited(path, ARM_FILE_LIMIT, "arm file (.toml or .json)")
    except Unreadable as exc:
        raise ArmFileError(shown, "", exc.problem, exc.expected) from None
    suffix = path.suffix.lower()
    if suffix not in (".toml", ".json"):
        raise ArmFileError(shown, "", f"unknown file type {quote(path.suffix or '(none)')}", "a .toml or .json file")
    if not raw.strip():
        raise ArmFileError(shown, "", "the file is empty", "an arm description (see docs/arm-file.md)")
    if b"\x00" in raw:
        raise ArmFileError(shown, "", "the file holds binary data (NUL bytes)", "a UTF-8 text file")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ArmFileError(shown, "", f"not valid UTF-8 text (byte {exc.start})", "a UTF-8 text file") from None
    digest = hashlib.sha256(raw).hexdigest()
    if suffix == ".toml":
        data = _parse_toml(text, shown)
        locate = TomlLocator(text)
    else:
        data = _parse_json(text, shown)
        locate = JsonLocator(text)
    return arm_from_data(data, shown, digest, locate)


def _parse_toml(text: str, shown: str) -> dict:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        match = re.search(r"\(at line (\d+), column (\d+)\)", message)
        line = int(match.group(1)) if match else None
        problem = re.sub(r"\s*\(at line \d+, column \d+\)", "", message)
        if match:
            problem += f" at column {match.group(2)}"
        raise ArmFileError(shown, "", f"malformed TOML: {problem}", "valid TOML", line=line) from None
    except ValueError:  # an integer literal longer than Python converts (4300 digits)
        raise ArmFileError(shown, "", "a number in the file has too many digits", _DIGITS_EXPECTED) from None
    except RecursionError:
        raise ArmFileError(shown, "", "arrays or tables are nested too deeply", _NESTING_EXPECTED) from None


_DIGITS_EXPECTED = "numbers of at most 4300 digits"
_NESTING_EXPECTED = "the nesting of an arm file (a few levels)"


def _parse_json(text: str, shown: str) -> dict:
    # NaN and Infinity (not JSON, but Python's json reads them) become floats here so that the
    # reader rejects them with the field and line, as it does for TOML's nan and inf.
    def unique_keys(pairs):
        seen = set()
        for key, _ in pairs:
            if key in seen:
                raise ArmFileError(shown, "", f"duplicate key {quote(key)} in one JSON object",
                                   "each key at most once per object")
            seen.add(key)
        return dict(pairs)

    try:
        data = json.loads(text, object_pairs_hook=unique_keys)
    except json.JSONDecodeError as exc:
        raise ArmFileError(shown, "", f"malformed JSON: {exc.msg} at column {exc.colno}", "valid JSON",
                           line=exc.lineno) from None
    except ValueError:  # an integer literal longer than Python converts (4300 digits)
        raise ArmFileError(shown, "", "a number in the file has too many digits", _DIGITS_EXPECTED) from None
    except RecursionError:
        raise ArmFileError(shown, "", "arrays or tables are nested too deeply", _NESTING_EXPECTED) from None
    if not isinstance(data, dict):
        raise ArmFileError(shown, "", f"the top level is a JSON {type(data).__name__}", "a JSON object")
    return data


class TomlLocator:
    """Best-effort line numbers for keys of a TOML file (tomllib gives lines only for syntax errors)."""

    def __init__(self, text: str):
        self.lines: dict[tuple, int] = {}
        table: tuple = ()
        counts: dict[str, int] = {}
        for number, line in enumerate(text.splitlines(), 1):
            stripped = line.strip()
            header = re.match(r"^\[\[\s*([A-Za-z0-9_.\-]+)\s*\]\]", stripped)
            if header:
                name = header.group(1)
                counts[name] = counts.get(name, 0) + 1
                table = (name, counts[name] - 1)
                self.lines.setdefault(table, number)
                continue
            header = re.match(r"^\[\s*([A-Za-z0-9_.\-]+)\s*\]", stripped)
            if header:
                parts = header.group(1).split(".")
                if parts[0] in counts and len(parts) > 1:  # [joint.sub] after [[joint]]
                    table = (parts[0], counts[parts[0]] - 1, *parts[1:])
                else:
                    table = tuple(parts)
                self.lines.setdefault(table, number)
                continue
            key = re.match(r"^([A-Za-z0-9_\-]+|\"[^\"]*\")\s*=", stripped)
            if key:
                name = key.group(1).strip('"')
                self.lines.setdefault(table + (name,), number)
                # (?<!...) makes a match start only where a key starts: linear time on long lines
                for inner in re.findall(r"(?<![A-Za-z0-9_\-])([A-Za-z0-9_\-]+)\s*=", stripped[key.end():]):
                    self.lines.setdefault(table + (name, inner), number)

    def __call__(self, path: tuple) -> int | None:
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return None


class JsonLocator:
    """Best-effort line numbers for JSON keys: the first line that shows the key after its parent."""

    def __init__(self, text: str):
        self.text_lines = text.splitlines()

    def __call__(self, path: tuple) -> int | None:
        start = 0
        found = None
        for part in path:
            if isinstance(part, int):
                hits = [i for i, l in enumerate(self.text_lines) if i >= start and "{" in l]
                if part < len(hits):
                    start = hits[part]
                    found = start + 1
                continue
            pattern = re.compile(r'"%s"\s*:' % re.escape(str(part)))
            for i in range(start, len(self.text_lines)):
                if pattern.search(self.text_lines[i]):
                    start, found = i, i + 1
                    break
            else:
                return found
        return found


class _Reader:
    """Validates one parsed document, raising ArmFileError with place and line."""

    def __init__(self, path: str, locate):
        self.path = path
        self.locate = locate
        self.notes: list[str] = []
        self.length_unit = "mm"       # set once [arm] is read; bounds are in the file's units
        self.angle_unit = "deg"

    def fail(self, where: str, place: tuple, problem: str, expected: str | None = None, hint: str | None = None):
        raise ArmFileError(self.path, where, problem, expected, line=self.locate(place), hint=hint)

    def check_keys(self, table: dict, known: tuple, where: str, place: tuple):
        for key in table:
            if key not in known:
                close = difflib.get_close_matches(str(key), known, n=1, cutoff=0.5)
                hint = f"did you mean '{close[0]}'?" if close else None
                self.fail(where, place + (key,), f"unknown key {quote(key)}", "one of " + ", ".join(known), hint)

    def table(self, parent: dict, key: str, where: str, place: tuple, required: bool) -> dict | None:
        if key not in parent:
            if required:
                self.fail(where, place, f"missing table '{key}'", f"a [{key}] table")
            return None
        value = parent[key]
        if not isinstance(value, dict):
            self.fail(where, place + (key,), f"'{key}' is {_a_kind(value)}", "a table of keys")
        return value

    def choice(self, table: dict, key: str, options, where: str, place: tuple, default=None, aliases=None):
        if key not in table:
            if default is not None:
                return default
            self.fail(where, place, f"missing field '{key}'", "one of " + ", ".join(options))
        value = table[key]
        if not isinstance(value, str):
            self.fail(where, place + (key,), f"field '{key}' is {_a_kind(value)} ({clip(repr(value))})",
                      "a string, one of " + ", ".join(options))
        lookup = aliases or {o: o for o in options}
        if value.lower() not in lookup:
            close = difflib.get_close_matches(value.lower(), list(lookup), n=1, cutoff=0.5)
            self.fail(where, place + (key,), f"unknown {key.replace('_', ' ')} {quote(value)}",
                      "one of " + ", ".join(lookup), f"did you mean '{close[0]}'?" if close else None)
        return lookup[value.lower()]

    def number(self, table: dict, key: str, where: str, place: tuple, kind: str, default=None) -> sp.Expr:
        """The exact value of ``table[key]``; ``kind`` ("length", "angle" or "plain") sets its bound."""
        if key not in table:
            if default is not None:
                return default
            self.fail(where, place, f"missing field '{key}'", "a number")
        return self.value(table[key], f"field '{key}'", where, place + (key,), kind)

    def value(self, raw, what: str, where: str, place: tuple, kind: str) -> sp.Expr:
        try:
            value = parse_exact(raw)
        except NotANumber as exc:
            self.fail(where, place, f"{what}: {exc}",
                      "a finite number, or a string such as \"pi/2\" using numbers, pi, + - * / and parentheses")
        bound, expected = self.bound(kind)
        if abs(value) > bound:
            shown = quote(raw) if isinstance(raw, str) else quote(repr(raw))
            if isinstance(raw, str) or len(shown) > 20:     # an expression, or too many digits to read
                shown += f" ({_magnitude(value)})"
            self.fail(where, place, f"{what} is {shown}, beyond the accepted size", expected)
        return value

    def bound(self, kind: str) -> tuple[sp.Expr, str]:
        """The largest magnitude of a number of ``kind`` in this file's units, and its wording."""
        if kind == "length":
            limit = LENGTH_LIMITS[self.length_unit]
            return limit, f"a length of at most {int(limit):,} {self.length_unit} (1 km) either way"
        if kind == "angle":
            limit = ANGLE_LIMITS[self.angle_unit]
            shown = f"{int(limit):,}" if limit.is_Integer else str(limit)
            return limit, f"an angle of at most {shown} {self.angle_unit} (100 turns) either way"
        return PLAIN_LIMIT, f"a number of at most {PLAIN_LIMIT} either way"

    def vector(self, table: dict, key: str, size: int, where: str, place: tuple, kind: str) -> list[sp.Expr]:
        raw = table[key]
        if not isinstance(raw, list) or len(raw) != size:
            found = f"a list of {len(raw)}" if isinstance(raw, list) else f"{_a_kind(raw)}"
            self.fail(where, place + (key,), f"field '{key}' is {found}", f"a list of {size} numbers")
        return [self.value(v, f"field '{key}' item {i + 1}", where, place + (key,), kind) for i, v in enumerate(raw)]


def _magnitude(value: sp.Expr) -> str:
    """An exact value's size for a message: about 1.00e+600 (the exact digits may be thousands)."""
    return "about " + str(sp.N(value, 3))


def _kind(value) -> str:
    return {bool: "boolean", int: "integer", float: "number", str: "string", list: "list",
            dict: "table", type(None): "null"}.get(type(value), type(value).__name__)


def _a_kind(value) -> str:
    """The kind of ``value`` with its article: 'an integer', 'a string'."""
    kind = _kind(value)
    return ("an " if kind[0] in "aeiou" else "a ") + kind


def arm_from_data(data: dict, path: str = "<data>", digest: str = "", locate=None) -> Arm:
    """Validate an already parsed document (the dict a TOML or JSON file gives) into an Arm."""
    reader = _Reader(path, locate or (lambda place: None))
    reader.check_keys(data, TOP_KEYS, "top level", ())
    arm_table = reader.table(data, "arm", "top level", (), required=True)
    reader.check_keys(arm_table, ARM_KEYS, "[arm]", ("arm",))
    name = _read_name(reader, arm_table, "[arm]", ("arm",), default=None)
    description = arm_table.get("description", "")
    if not isinstance(description, str):
        reader.fail("[arm]", ("arm", "description"), f"field 'description' is {_a_kind(description)}", "a string")
    if len(description) > MAX_DESCRIPTION:
        reader.fail("[arm]", ("arm", "description"), f"field 'description' is {len(description):,} characters long",
                    f"a description of at most {MAX_DESCRIPTION:,} characters")
    convention = reader.choice(arm_table, "convention", CONVENTIONS, "[arm]", ("arm",),
                               aliases=CONVENTION_ALIASES)
    length_unit = reader.choice(arm_table, "length_unit", LENGTH_UNITS, "[arm]", ("arm",))
    angle_unit = reader.choice(arm_table, "angle_unit", ANGLE_UNITS, "[arm]", ("arm",))
    reader.length_unit, reader.angle_unit = length_unit, angle_unit
    angle_scale = sp.pi / 180 if angle_unit == "deg" else sp.Integer(1)

    if "joint" not in data:
        reader.fail("top level", (), "no joints: missing [[joint]] entries", "at least one [[joint]] table")
    joint_list = data["joint"]
    if not isinstance(joint_list, list):
        reader.fail("top level", ("joint",), f"'joint' is {_a_kind(joint_list)}",
                    "an array of tables ([[joint]] in TOML, a list of objects in JSON)")
    if not joint_list:
        reader.fail("top level", ("joint",), "zero joints", "at least one joint")
    joints = []
    seen_names: dict[str, int] = {}
    for i, raw in enumerate(joint_list):
        place = ("joint", i)
        if not isinstance(raw, dict):
            reader.fail(f"joint {i + 1}", place, f"is {_a_kind(raw)}", "a table of joint fields")
        joint = _read_joint(reader, raw, i, place, angle_unit, angle_scale)
        if joint.name in seen_names:
            reader.fail(f"{joint.label}", place + ("name",),
                        f"duplicate joint name '{joint.name}' (joint {seen_names[joint.name]} has it too)",
                        "a name unique within the arm")
        seen_names[joint.name] = joint.index
        joints.append(joint)

    base = _read_frame(reader, data, "base", angle_scale)
    tool = _read_frame(reader, data, "tool", angle_scale)
    target = _read_target(reader, data)
    given = _read_given_joint(reader, data, joints)
    arm = Arm(name=name, description=description, convention=convention, length_unit=length_unit,
              angle_unit=angle_unit, joints=tuple(joints), base=base, tool=tool, source=path,
              digest=digest, notes=tuple(reader.notes), target=target, given_joint=given)
    _check_equivalent_readings(reader, arm)
    return arm


def _check_equivalent_readings(reader: _Reader, arm: Arm) -> None:
    """Refuse limits that would give every pose more solutions than anyone can use."""
    counts = arm.equivalent_readings()
    total = math.prod(counts)
    if total > MAX_EQUIVALENT_READINGS:
        wide = ", ".join(f"{j.label} {c}" for j, c in zip(arm.joints, counts) if c > 1)
        reader.fail("joint limits", ("joint",),
                    f"the limits allow {total:,} equivalent readings of every closed-form solution ({wide})",
                    f"at most {MAX_EQUIVALENT_READINGS:,} in all (the product over the joints of the readings "
                    "within the limits that give one joint angle): narrow the joints that turn more than once")


def is_valid_name(text: str) -> bool:
    """A name the arm file accepts: non-empty, printable, at most MAX_NAME characters."""
    return bool(text and text.strip()) and len(text) <= MAX_NAME and text.isprintable()


def _read_name(reader: _Reader, table: dict, where: str, place: tuple, default: str | None) -> str:
    if "name" not in table:
        if default is None:
            reader.fail(where, place, "missing field 'name'", "a non-empty string")
        return default
    value = table["name"]
    if not isinstance(value, str) or not value.strip():
        found = f"{_a_kind(value)}" if not isinstance(value, str) else "an empty string"
        reader.fail(where, place + ("name",), f"field 'name' is {found}", "a non-empty string")
    if len(value) > MAX_NAME:
        reader.fail(where, place + ("name",), f"field 'name' {quote(value)} is too long",
                    f"a printable name of at most {MAX_NAME} characters")
    if not value.isprintable():
        reader.fail(where, place + ("name",), f"field 'name' {quote(value)} holds control characters "
                    "(or other characters that are not printable)", f"a printable name of at most {MAX_NAME} characters")
    return value.strip()


def _read_joint(reader: _Reader, raw: dict, i: int, place: tuple, angle_unit: str, angle_scale) -> Joint:
    index = i + 1
    name = _read_name(reader, raw, f"joint {index}", place, default=f"j{index}")
    where = f"joint {index} '{name}'"
    reader.check_keys(raw, JOINT_KEYS, where, place)
    kind = reader.choice(raw, "type", JOINT_KINDS, where, place)

    def angle(key: str, default=None):
        value = reader.number(raw, key, where, place, "angle", default)
        if angle_unit == "deg" and value.has(sp.pi):
            reader.fail(where, place + (key,), f"field '{key}' uses pi in an arm whose angles are in degrees",
                        "degrees (write 90, not \"pi/2\"), or angle_unit = \"rad\"")
        value = value * angle_scale
        snapped = snap_radians(value) if angle_unit == "rad" else value
        if snapped != value:
            reader.notes.append(f"{where}: {key} = {float(value)!r} rad read as {snapped}")
        return snapped

    a = reader.number(raw, "a", where, place, "length")
    alpha = angle("alpha")
    d = reader.number(raw, "d", where, place, "length")
    theta = angle("theta")
    if kind == "revolute":
        offset = angle("offset", sp.Integer(0))
    else:
        offset = reader.number(raw, "offset", where, place, "length", sp.Integer(0))
    direction = raw.get("direction", 1)
    if type(direction) is not int or direction not in (1, -1):   # not 1.0, not true
        shown = (clip(json.dumps(direction)) if isinstance(direction, (bool, int, float, str))
                 else _a_kind(direction))
        if type(direction) is float:
            shown += " (a decimal)"
        reader.fail(where, place + ("direction",), f"field 'direction' is {shown}", "1 or -1 (an integer)")
    if "limits" in raw:
        lower, upper = reader.vector(raw, "limits", 2, where, place, "angle" if kind == "revolute" else "length")
        scale = angle_scale if kind == "revolute" else 1
        if lower >= upper:
            reader.fail(where, place + ("limits",), f"lower limit {lower} is not below upper limit {upper}",
                        "[lower, upper] with lower < upper")
        limits = (float(lower * scale), float(upper * scale))
    elif kind == "revolute":
        limits = (-math.pi, math.pi)
    else:
        reader.fail(where, place, "missing field 'limits' (a prismatic joint has no natural range)",
                    "[lower, upper] in the length unit")
    return Joint(index=index, name=name, kind=kind, a=a, alpha=alpha, d=d, theta=theta, offset=offset,
                 direction=int(direction), limits=limits)


def _read_target(reader: _Reader, data: dict) -> Target | None:
    """The [target] table: what the arm is asked for (docs/arm-file.md). None when absent."""
    table = reader.table(data, "target", "top level", (), required=False)
    if table is None:
        return None
    where, place = "[target]", ("target",)
    reader.check_keys(table, TARGET_KEYS, where, place)
    if "kind" not in table and "given_joint" in table:
        return None                       # only a given joint: the natural target of the other joints
    kind = reader.choice(table, "kind", TARGET_KINDS, where, place)
    axis = None
    if "axis" in table:
        if kind != "point_and_angle":
            reader.fail(where, place + ("axis",), f"'axis' is given for a '{kind}' target",
                        "'axis' only with kind = \"point_and_angle\" (the world axis the angle turns about)")
        values = reader.vector(table, "axis", 3, where, place, "plain")
        norm = sp.sqrt(sum(v * v for v in values))
        if norm == 0:
            reader.fail(where, place + ("axis",), "'axis' is the zero vector", "a direction such as [0, 0, 1]")
        axis = tuple(sp.nsimplify(v / norm) if (v / norm).is_Rational else v / norm for v in values)
    tool_axis = "z"
    if "tool_axis" in table:
        if kind != "point_and_direction":
            reader.fail(where, place + ("tool_axis",), f"'tool_axis' is given for a '{kind}' target",
                        "'tool_axis' only with kind = \"point_and_direction\" (which tool axis is directed)")
        tool_axis = reader.choice(table, "tool_axis", ("x", "y", "z"), where, place)
    return Target(kind, axis, tool_axis, True)


def _read_given_joint(reader: _Reader, data: dict, joints: list[Joint]) -> int | None:
    """[target] given_joint: the joint whose reading the caller gives (its number from 1, or its
    name); None when absent."""
    table = data.get("target")
    if not isinstance(table, dict) or "given_joint" not in table:
        return None
    raw = table["given_joint"]
    place = ("target", "given_joint")
    names = {j.name: j.index for j in joints}
    if isinstance(raw, bool) or not isinstance(raw, (int, str)):
        reader.fail("[target]", place, f"'given_joint' is {_a_kind(raw)}",
                    f"a joint number from 1 to {len(joints)} or a joint name")
    if isinstance(raw, str):
        if raw not in names:
            reader.fail("[target]", place, f"'given_joint' names no joint ({quote(raw)})",
                        "one of the joint names: " + ", ".join(names))
        return names[raw]
    if not 1 <= raw <= len(joints):
        reader.fail("[target]", place, f"'given_joint' is {raw}", f"a joint number from 1 to {len(joints)}")
    return raw


def _read_frame(reader: _Reader, data: dict, key: str, angle_scale) -> sp.ImmutableMatrix:
    table = reader.table(data, key, "top level", (), required=False)
    if table is None:
        return sp.ImmutableMatrix(sp.eye(4))
    where = f"[{key}]"
    place = (key,)
    reader.check_keys(table, FRAME_KEYS, where, place)
    translation = reader.vector(table, "translation", 3, where, place, "length") if "translation" in table else [0, 0, 0]
    rotation = sp.eye(3)
    if "rotation" in table:
        rotation = _read_rotation(reader, table["rotation"], f"[{key}.rotation]", place + ("rotation",),
                                  angle_scale)
    return sp.ImmutableMatrix(homogeneous(rotation, translation))


def _read_rotation(reader: _Reader, table, where: str, place: tuple, angle_scale) -> sp.Matrix:
    if not isinstance(table, dict):
        reader.fail(where, place, f"'rotation' is {_a_kind(table)}",
                    "a table with angles+axes+frame, or quaternion+order, or matrix")
    reader.check_keys(table, ROTATION_KEYS, where, place)
    forms = [k for k in ("angles", "quaternion", "matrix") if k in table]
    if len(forms) != 1:
        found = "none of them" if not forms else " and ".join(forms)
        reader.fail(where, place, f"found {found}", "exactly one of 'angles', 'quaternion' or 'matrix'")
    form = forms[0]
    belongs = {"angles": ("angles", "axes", "frame"), "quaternion": ("quaternion", "order"), "matrix": ("matrix",)}
    stray = [k for k in table if k not in belongs[form]]
    if stray:
        owner = next(f for f, keys in belongs.items() if stray[0] in keys)
        reader.fail(where, place + (stray[0],), f"'{stray[0]}' belongs to the '{owner}' form, not to '{form}'",
                    f"only {', '.join(repr(k) for k in belongs[form])} with '{form}'")
    if form == "angles":
        for needed in ("axes", "frame"):
            if needed not in table:
                reader.fail(where, place, f"missing field '{needed}' (the angles' convention must be stated)",
                            "axes = three of x, y, z such as \"xyz\" or \"zyz\"; frame = \"fixed\" or \"moving\"")
        axes = table["axes"]
        if not isinstance(axes, str) or not re.fullmatch(r"[xyz]{3}", axes.lower()) or \
                axes[0].lower() == axes[1].lower() or axes[1].lower() == axes[2].lower():
            reader.fail(where, place + ("axes",), f"field 'axes' is {quote(axes) if isinstance(axes, str) else _a_kind(axes)}",
                        "three letters of x, y, z with no two neighbours equal, such as \"xyz\" or \"zyz\"")
        frame = reader.choice(table, "frame", ("fixed", "moving"), where, place)
        raw_angles = reader.vector(table, "angles", 3, where, place, "angle")
        if angle_scale != 1 and any(v.has(sp.pi) for v in raw_angles):
            reader.fail(where, place + ("angles",), "'angles' uses pi in an arm whose angles are in degrees",
                        "degrees (write 90, not \"pi/2\"), or angle_unit = \"rad\"")
        angles = [v * angle_scale for v in raw_angles]
        if angle_scale == 1:  # radians: a double's rendering of k*pi/12 means the exact multiple
            snapped = [snap_radians(v) for v in angles]
            for k, (before, after) in enumerate(zip(angles, snapped)):
                if before != after:
                    reader.notes.append(f"{where}: angle {k + 1} = {float(before)!r} rad read as {after}")
            angles = snapped
        return from_axis_angles(axes.lower(), angles, frame)
    if form == "quaternion":
        if "order" not in table:
            reader.fail(where, place, "missing field 'order' (the component order must be stated)",
                        "order = \"wxyz\" or \"xyzw\" (w is the scalar part)")
        order = reader.choice(table, "order", QUATERNION_ORDERS, where, place)
        values = reader.vector(table, "quaternion", 4, where, place, "plain")
        w, x, y, z = values if order == "wxyz" else (values[3], values[0], values[1], values[2])
        norm = math.sqrt(float(w * w + x * x + y * y + z * z))
        if abs(norm - 1.0) > UNIT_TOLERANCE:
            reader.fail(where, place + ("quaternion",), f"quaternion has norm {norm:.9g}",
                        f"a unit quaternion (norm within {UNIT_TOLERANCE:g} of 1)")
        return from_quaternion(w, x, y, z)
    rows = table["matrix"]
    if not isinstance(rows, list) or len(rows) != 3 or not all(isinstance(r, list) and len(r) == 3 for r in rows):
        reader.fail(where, place + ("matrix",), "field 'matrix' is not 3 rows of 3 numbers", "[[r11, r12, r13], [...], [...]]")
    matrix = sp.Matrix([[reader.value(v, f"matrix row {r + 1}", where, place + ("matrix",), "plain") for v in row]
                        for r, row in enumerate(rows)])
    numeric = sp.matrix2numpy(matrix, dtype=float)
    import numpy as np
    error = np.abs(numeric.T @ numeric - np.eye(3)).max()
    if error > UNIT_TOLERANCE or np.linalg.det(numeric) < 0:
        reader.fail(where, place + ("matrix",), f"matrix is not a rotation (|R^T R - I| = {error:.3g}, "
                    f"det = {np.linalg.det(numeric):.6g})", "an orthonormal matrix with determinant +1")
    return matrix
