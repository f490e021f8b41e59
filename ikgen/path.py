"""Path solving: a sequence of tool poses in, one joint trajectory out, with its trouble spots.

Three parts, documented for users in docs/path-file.md:

- **Path files** (``read_path_file``): a small CSV of our own, one tool pose per row, position
  ``x, y, z`` in the arm's length unit and orientation as a unit quaternion ``qw, qx, qy, qz``
  (scalar first, Hamilton convention, world frame). Every problem raises ``PathFileError``
  naming the file, line, column, what was found and what was expected.
- **Straight lines** (``straight_line``, ``polyline``): positions interpolated linearly and
  orientations by spherical linear interpolation (slerp, shortest arc) with the same parameter.
- **Solving** (``solve_path``): keep the configuration of the solution nearest the start at the
  first pose, then at each step take the solution of that configuration nearest the previous
  step, and report where the path leaves the workspace, needs a configuration change, passes
  near a singularity, crosses one, or makes a joint step larger than allowed.

The solver module is anything with ``inverse(pose, current, limits)`` returning solutions shaped
like the generated Python solver's ``Solution`` tuples ``(joints, config, singular,
conditioning, within_limits)``; the names ``JOINT_NAMES``, ``CONDITION_NAMES``, ``LABEL_NAMES``
and ``LABEL_VALUES`` are used when present.

Indices in this module count from 0; the command line prints step numbers counting from 1.

Safety: a joint path that this module calls clean is clean only for the arm file and the poses
it was given. Collisions, speeds, accelerations and cell safety are not checked; run every path
in simulation and then at low speed with nobody inside the arm's reach.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import PATH_LIMIT, IkgenError, clip, quote
from .exact import plain_decimal
from .files import Unreadable, read_limited
from .rotations import matrix_to_quaternion

POSITION_COLUMNS = ("x", "y", "z")
QUATERNION_COLUMNS = ("qw", "qx", "qy", "qz")
COLUMNS = POSITION_COLUMNS + QUATERNION_COLUMNS
UNIT_TOLERANCE = 1e-3           # how far from 1 a quaternion's length may be (it is normalised after)
MAX_POSES = 100_000             # a larger path is refused (solving runs at Python speed)
PATH_FILE_LIMIT = 32 << 20      # bytes of a path file (32 MiB: 100,000 rows of 7 long numbers and comments)
SINGULAR_THRESHOLD = 0.01       # default: a conditioning measure below this is "near a singularity"
CROSSING_WINDOW = 0.1           # a sign change is a crossing when the measure gets below this between steps
REFINE = 32                     # poses checked between two steps to tell a crossing from a renamed label
EXACTLY_SINGULAR = 1e-9         # a measure at most this is on the singular set: its label is either value

# Event kinds (the words the summary prints).
LEAVES_WORKSPACE = "leaves the workspace"
OUTSIDE_LIMITS = "outside the joint limits"
CONFIGURATION_CHANGE = "needs a configuration change"
NEAR_SINGULARITY = "near a singularity"
CROSSES_SINGULARITY = "crosses a singularity"
LARGE_STEP = "large joint step"
RESUMES = "resumes after a gap"
LABEL_CHANGE = "label changes"
EVENT_KINDS = (LEAVES_WORKSPACE, OUTSIDE_LIMITS, CONFIGURATION_CHANGE, NEAR_SINGULARITY,
               CROSSES_SINGULARITY, LABEL_CHANGE, LARGE_STEP, RESUMES)

# Step status values.
SOLVED = "solved"               # a solution of the kept configuration
SWITCHED = "switched"           # solved, after a configuration change (on_change="switch")
UNREACHABLE = "unreachable"     # no closed-form solution: outside the workspace
OUT_OF_LIMITS = "out of limits"  # closed-form solutions exist, none within the joint limits
CHANGE_NEEDED = "change needed"  # solutions exist, none of the kept configuration (on_change="stop")
STOPPED = "stopped"             # not attempted: the path stopped at an earlier step
ON_CHANGE = ("stop", "switch")


# ------------------------------------------------------------------------------ errors

class PathFileError(IkgenError):
    """A problem in a path file: file, line, place (column), what was found, what was expected."""

    def __init__(self, path: str, problem: str, expected: str | None = None, line: int | None = None,
                 where: str | None = None, hint: str | None = None):
        self.path, self.problem, self.expected = path, problem, expected
        self.line, self.where, self.hint = line, where, hint
        shown = clip(path, PATH_LIMIT)
        text = shown if line is None else f"{shown}:{line}"
        if where:
            text += f": {where}"
        text += f": {problem}"
        if expected:
            text += f"; expected {expected}"
        if hint:
            text += f" ({hint})"
        super().__init__(text)


# ------------------------------------------------------------------------- quaternions

def quaternion_matrix(quaternion) -> np.ndarray:
    """3x3 rotation of the quaternion (w, x, y, z), normalised first (Hamilton convention:
    i j = k; the rotation takes vectors of the tool frame into the world frame)."""
    w, x, y, z = np.asarray(quaternion, dtype=float) / np.linalg.norm(quaternion)
    return np.array([
        [1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
        [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
        [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)],
    ])


def pose_matrix(position, quaternion) -> np.ndarray:
    """4x4 homogeneous pose from a position (x, y, z) and a quaternion (w, x, y, z)."""
    pose = np.eye(4)
    pose[:3, :3] = quaternion_matrix(quaternion)
    pose[:3, 3] = np.asarray(position, dtype=float)
    return pose


def pose_quaternion(pose) -> np.ndarray:
    """The unit quaternion (w, x, y, z), w >= 0, of a pose's rotation."""
    return matrix_to_quaternion(np.asarray(pose, dtype=float)[:3, :3])


def slerp(q0, q1, t) -> np.ndarray:
    """Spherical linear interpolation between unit quaternions (w, x, y, z) at parameters ``t``
    (array, 0 gives q0, 1 gives q1), along the shorter arc (q1 is negated when q0 . q1 < 0, since
    q and -q are one rotation). Formula: Shoemake, 'Animating rotation with quaternion curves',
    SIGGRAPH 1985. Returns (len(t), 4)."""
    q0 = np.asarray(q0, dtype=float) / np.linalg.norm(q0)
    q1 = np.asarray(q1, dtype=float) / np.linalg.norm(q1)
    t = np.atleast_1d(np.asarray(t, dtype=float))[:, None]
    dot = float(np.dot(q0, q1))
    if dot < 0.0:
        q1, dot = -q1, -dot
    dot = min(dot, 1.0)
    angle = math.acos(dot)                       # half the rotation angle between the two
    if angle < 1e-9:                             # (nearly) the same rotation: linear is exact enough
        result = (1.0 - t) * q0 + t * q1
    else:
        result = (np.sin((1.0 - t) * angle) * q0 + np.sin(t * angle) * q1) / math.sin(angle)
    return result / np.linalg.norm(result, axis=1, keepdims=True)


def straight_line(start_pose, end_pose, steps: int) -> np.ndarray:
    """``steps`` poses (steps, 4, 4) from ``start_pose`` to ``end_pose``, both included: the
    position moves linearly and the orientation by slerp, both with the parameter k / (steps - 1)."""
    if isinstance(steps, bool) or int(steps) != steps or steps < 2:
        raise ValueError(f"steps must be a whole number of at least 2 (both ends included), not {steps!r}")
    start, end = np.asarray(start_pose, dtype=float), np.asarray(end_pose, dtype=float)
    for name, pose in (("start_pose", start), ("end_pose", end)):
        if pose.shape != (4, 4) or not np.all(np.isfinite(pose)):
            raise ValueError(f"{name} must be a finite 4x4 homogeneous matrix")
    t = np.linspace(0.0, 1.0, int(steps))
    quaternions = slerp(pose_quaternion(start), pose_quaternion(end), t)
    poses = np.zeros((int(steps), 4, 4))
    for k, (tk, q) in enumerate(zip(t, quaternions)):
        poses[k, :3, :3] = quaternion_matrix(q)
        poses[k, :3, 3] = (1.0 - tk) * start[:3, 3] + tk * end[:3, 3]
        poses[k, 3, 3] = 1.0
    poses[0], poses[-1] = start, end             # the ends exactly as given
    return poses


def polyline(poses, steps: int) -> tuple[np.ndarray, list[tuple[int, int, int]]]:
    """Straight lines of ``steps`` poses between each pair of consecutive ``poses`` (a shared end
    counted once): (M, 4, 4) poses with M = (len(poses) - 1) * (steps - 1) + 1, and for each one
    (row a, row b, k): it is pose k of steps on the line from row a to row b (0-based rows)."""
    poses = np.asarray(poses, dtype=float)
    if len(poses) < 2:
        raise ValueError("a straight-line path needs at least two poses")
    out, origin = [poses[0]], [(0, 0, 0)]
    for a in range(len(poses) - 1):
        line = straight_line(poses[a], poses[a + 1], steps)
        out.extend(line[1:])
        origin.extend((a, a + 1, k) for k in range(1, steps))
    return np.array(out), origin


# --------------------------------------------------------------------------- path files

@dataclass(frozen=True)
class PathFile:
    source: str                     # path as given
    poses: np.ndarray               # (R, 4, 4), one per data row
    positions: np.ndarray           # (R, 3) as written
    quaternions: np.ndarray         # (R, 4) (w, x, y, z), normalised
    lines: tuple[int, ...]          # 1-based line number of each data row
    length_unit: str | None         # the unit the header states for x, y, z (None when it states none)


def _column_name(text: str) -> tuple[str, str | None]:
    """'x [mm]' -> ('x', 'mm'); 'qw' -> ('qw', None); names are read without regard to case."""
    text = text.strip()
    unit = None
    if text.endswith("]") and "[" in text:
        text, unit = text[:-1].split("[", 1)
        text, unit = text.strip(), unit.strip()
    return text.lower(), unit


def _closest(word: str, options) -> str | None:
    import difflib
    found = difflib.get_close_matches(word, options, n=1, cutoff=0.6)
    return f"did you mean '{found[0]}'?" if found else None


def read_path_file(path: str | Path, length_unit: str | None = None) -> PathFile:
    """Read and validate a path file; ``length_unit`` (the arm's) is checked against the unit the
    header states for x, y, z, if it states one."""
    path = Path(path)
    shown = str(path)
    try:
        raw = read_limited(path, PATH_FILE_LIMIT, "path file (.csv)")
    except Unreadable as exc:
        raise PathFileError(shown, exc.problem, exc.expected) from None
    if b"\x00" in raw:
        raise PathFileError(shown, "the file holds binary data (NUL bytes)", "a UTF-8 text file")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise PathFileError(shown, f"not valid UTF-8 text (byte {exc.start})", "a UTF-8 text file") from None
    return parse_path_text(text, shown, length_unit)


def parse_path_text(text: str, shown: str = "<path>", length_unit: str | None = None) -> PathFile:
    """Parse the text of a path file (see read_path_file); ``shown`` names it in messages."""
    header = None            # column name -> field index
    header_line = 0
    field_count = 0
    stated_unit = None
    rows, lines = [], []
    if text.startswith("\ufeff"):             # a byte-order mark, as some spreadsheets write
        text = text[1:]
    for number, raw_line in enumerate(text.splitlines(), 1):
        content = raw_line.split("#", 1)[0].strip()
        if not content:
            continue
        fields = [f.strip() for f in content.split(",")]
        if header is None:
            header, stated_unit = _read_header(fields, shown, number, length_unit)
            header_line, field_count = number, len(fields)
            continue
        if len(rows) >= MAX_POSES:
            raise PathFileError(shown, f"more than {MAX_POSES} poses", f"at most {MAX_POSES} rows", line=number)
        if len(fields) != field_count:
            raise PathFileError(shown, f"{len(fields)} field(s) on this row", f"{field_count}, one per column "
                                f"named on line {header_line}", line=number)
        values = {}
        for name, index in header.items():
            word = fields[index]
            where = f"column '{name}' (field {index + 1})"
            if not word:
                raise PathFileError(shown, "empty field", "a number", line=number, where=where)
            value = plain_decimal(word)
            if value is None:
                raise PathFileError(shown, f"{quote(word)} is not a number", "a decimal number such as 12.5 or -0.25",
                                    line=number, where=where)
            if not math.isfinite(value):
                raise PathFileError(shown, f"{quote(word)} is not a finite number", "a finite decimal number",
                                    line=number, where=where)
            values[name] = value
        quaternion = np.array([values[c] for c in QUATERNION_COLUMNS])
        norm = float(np.linalg.norm(quaternion))
        if abs(norm - 1.0) > UNIT_TOLERANCE:
            shown_q = ", ".join(clip(fields[header[c]], 24) for c in QUATERNION_COLUMNS)
            raise PathFileError(shown, f"the quaternion ({shown_q}) has length {norm:.6g}",
                                f"a unit quaternion (length 1 within {UNIT_TOLERANCE:g})", line=number,
                                where="columns qw, qx, qy, qz")
        rows.append((np.array([values[c] for c in POSITION_COLUMNS]), quaternion / norm))
        lines.append(number)
    if header is None:
        raise PathFileError(shown, "the file is empty (no header line)",
                            "a header line naming the columns x, y, z, qw, qx, qy, qz, then one pose per row")
    if not rows:
        raise PathFileError(shown, "no poses after the header", "one pose per row after the header",
                            line=header_line)
    positions = np.array([p for p, _ in rows])
    quaternions = np.array([q for _, q in rows])
    poses = np.array([pose_matrix(p, q) for p, q in rows])
    return PathFile(shown, poses, positions, quaternions, tuple(lines), stated_unit)


def _read_header(fields: list[str], shown: str, number: int, length_unit: str | None):
    expected = "a header line naming the columns x, y, z, qw, qx, qy, qz (in any order)"
    if plain_decimal(fields[0]) is not None:
        raise PathFileError(shown, f"the first line holds numbers ({quote(fields[0])}), not column names",
                            expected, line=number)
    header, units = {}, {}
    for index, word in enumerate(fields):
        name, unit = _column_name(word)
        where = f"header field {index + 1}"
        if name not in COLUMNS:
            raise PathFileError(shown, f"unknown column {quote(word)}", "one of " + ", ".join(COLUMNS), line=number,
                                where=where, hint=_closest(name, COLUMNS))
        if name in header:
            raise PathFileError(shown, f"column '{name}' is named twice", "each column once", line=number,
                                where=where)
        if unit is not None:
            if name not in POSITION_COLUMNS:
                raise PathFileError(shown, f"column '{name}' has a unit [{clip(unit)}]",
                                    "no unit on quaternion columns (they are pure numbers)", line=number, where=where)
            if unit not in ("m", "mm"):
                raise PathFileError(shown, f"unknown length unit [{clip(unit)}]", "[m] or [mm]", line=number, where=where)
            if length_unit is not None and unit != length_unit:
                raise PathFileError(shown, f"column '{name}' is in [{unit}] but the arm's lengths are in "
                                    f"{length_unit}", f"positions in {length_unit} (convert the file, or "
                                    "use the arm file it was written for)", line=number, where=where)
            units[name] = unit
        header[name] = index
    missing = [c for c in COLUMNS if c not in header]
    if missing:
        raise PathFileError(shown, "missing column(s) " + ", ".join(missing), expected, line=number)
    if len(set(units.values())) > 1:
        raise PathFileError(shown, "x, y and z state different units", "one length unit for x, y, z",
                            line=number)
    return header, (next(iter(units.values())) if units else None)


# ------------------------------------------------------------------------------- solving

@dataclass(frozen=True)
class Event:
    """Something worth a person's attention at one step (``index`` counts from 0)."""
    index: int
    kind: str                       # one of EVENT_KINDS
    detail: str                     # one line for people
    branches: tuple[str, ...] = ()  # the branches / measures concerned, when any

    @property
    def step(self) -> int:
        """The step number people see (counting from 1)."""
        return self.index + 1


@dataclass
class PathResult:
    joints: np.ndarray              # (N, dof); NaN rows where a step is not solved
    status: list[str]               # per step: SOLVED, SWITCHED, UNREACHABLE, OUT_OF_LIMITS, CHANGE_NEEDED, STOPPED
    configs: list                   # per step: the chosen solution's labels (tuple) or None
    conditioning: np.ndarray        # (N, measures); NaN where not solved
    steps: np.ndarray               # (N, dof) |q_k - q_k-1| where steps k-1 and k are both solved, else NaN
    events: list[Event]
    start: np.ndarray               # the start readings
    kept: tuple | None              # the configuration chosen at the first solved step
    final: tuple | None             # the configuration at the last solved step
    joint_names: tuple[str, ...]
    condition_names: tuple[str, ...]
    label_names: tuple[str, ...]
    threshold: float
    on_change: str
    approach: np.ndarray | None = None   # |q at the first solved step - start| per joint
    stopped_at: int | None = None        # index of the step where the path stopped

    @property
    def count(self) -> int:
        return len(self.status)

    @property
    def solved(self) -> int:
        return sum(s in (SOLVED, SWITCHED) for s in self.status)

    @property
    def solved_mask(self) -> np.ndarray:
        return np.array([s in (SOLVED, SWITCHED) for s in self.status], dtype=bool)

    @property
    def flags(self) -> list[set[str]]:
        """Per step, the set of event kinds reported there."""
        out = [set() for _ in self.status]
        for event in self.events:
            out[event.index].add(event.kind)
        return out

    def events_of(self, kind: str) -> list[Event]:
        return [e for e in self.events if e.kind == kind]

    @property
    def largest_step(self) -> np.ndarray:
        """Per joint, the largest |change| between two consecutive solved steps (NaN if none)."""
        if not np.any(np.isfinite(self.steps)):
            return np.full(len(self.joint_names), np.nan)
        return np.nanmax(np.where(np.isfinite(self.steps), self.steps, -np.inf), axis=0)

    @property
    def largest_step_at(self) -> list[int | None]:
        """Per joint, the index of the step that makes its largest change (None if none)."""
        out = []
        for column in self.steps.T:
            finite = np.isfinite(column)
            out.append(int(np.argmax(np.where(finite, column, -np.inf))) if finite.any() else None)
        return out

    @property
    def complete(self) -> bool:
        """Every step solved, in one configuration."""
        return all(s == SOLVED for s in self.status)

    @property
    def summary(self) -> dict:
        return {"steps": self.count, "solved": self.solved, "kept": self.kept, "final": self.final,
                "complete": self.complete, "stopped_at": self.stopped_at,
                "largest_step": self.largest_step.tolist(), "largest_step_at": self.largest_step_at,
                "events": {k: len(self.events_of(k)) for k in EVENT_KINDS if self.events_of(k)}}


def describe_config(config, label_names) -> str:
    if config is None:
        return "none"
    if label_names and len(label_names) == len(config):
        return ", ".join(f"{n} {v}" for n, v in zip(label_names, config))
    return ", ".join(str(v) for v in config)


def _distance(a, b, weights) -> float:
    d = np.asarray(a, dtype=float) - np.asarray(b, dtype=float)
    return float(np.sqrt(np.sum(d * d if weights is None else weights * d * d)))


GIVEN_WINDOW = 20   # reading units of the given joint searched on either side of its last reading
GIVEN_SAMPLES = 21  # readings sampled in that window before a golden-section refinement


class GivenFollower:
    """The solver of an arm with a given joint (a seven-axis arm, say), for path solving: at each
    pose the given joint's reading is the one whose nearest solution is closest to ``current``,
    searched within ``window`` of its reading in ``current`` (a scan of GIVEN_SAMPLES readings,
    then a golden-section refinement within one sample spacing), so the given joint moves
    continuously and nothing else of path solving changes. When no reading in the window has a
    solution, the whole range is scanned (choose_given), which may jump; the path then reports the
    large step or the configuration change as usual. Other names are the module's."""

    def __init__(self, module, window: float = GIVEN_WINDOW):
        self.module = module
        self.window = window
        self.joint = module.GIVEN_JOINT - 1
        self.low, self.high = module.JOINT_LIMITS[self.joint]

    def __getattr__(self, name):
        return getattr(self.module, name)

    def nearest_at(self, pose, value, current, limits):
        best = None
        for solution in self.module.inverse(pose, value, current, limits):
            d = _distance(solution[0], current, None)
            if best is None or d < best:
                best = d
        return best

    def choose(self, pose, current, limits) -> float | None:
        """The given joint's reading for ``pose`` near ``current`` (None: no solution at all); a
        best reading at the window's edge moves the window on (the best lies beyond it)."""
        centre = float(current[self.joint])
        for _ in range(20):
            value = self.choose_within(pose, current, limits, centre)
            edge = value is not None and (value <= centre - self.window + 1e-9 or value >= centre + self.window - 1e-9)
            if not edge or not self.low < value < self.high:
                return value
            centre = value
        return value

    def choose_within(self, pose, current, limits, centre: float) -> float | None:
        low, high = max(self.low, centre - self.window), min(self.high, centre + self.window)
        if low > high:
            low = high = min(max(centre, self.low), self.high)
        grid = np.linspace(low, high, GIVEN_SAMPLES)
        scores = [self.nearest_at(pose, float(g), current, limits) for g in grid]
        found = [(d, float(g)) for d, g in zip(scores, grid) if d is not None]
        if not found:
            chosen = self.module.choose_given(pose, current, "nearest", limits=limits)
            return None if chosen is None else chosen[0]
        best_d, best_g = min(found)
        spacing = (high - low) / (GIVEN_SAMPLES - 1)
        a, b = max(low, best_g - spacing), min(high, best_g + spacing)
        ratio = 0.6180339887498949
        for _ in range(30):
            x1, x2 = b - ratio * (b - a), a + ratio * (b - a)
            d1, d2 = (self.nearest_at(pose, x, current, limits) for x in (x1, x2))
            d1 = math.inf if d1 is None else d1
            d2 = math.inf if d2 is None else d2
            for d, x in ((d1, x1), (d2, x2)):
                if d < best_d:
                    best_d, best_g = d, x
            if d1 <= d2:
                b = x2
            else:
                a = x1
        return best_g

    def inverse(self, pose, current, limits="drop"):
        """Every solution of ``pose`` at the given joint's reading chosen near ``current``."""
        value = self.choose(pose, current, limits)
        return [] if value is None else self.module.inverse(pose, value, current, limits)


def solve_path(module, poses, start, weights=None, singular_threshold: float = SINGULAR_THRESHOLD,
               on_change: str = "stop", max_step: float | None = None, limits: str = "drop",
               joint_units=None, crossing_window: float = CROSSING_WINDOW) -> PathResult:
    """Solve a sequence of poses on one configuration; see the module docstring and
    docs/path-file.md ("How a path is solved") for the rules.

    module      the solver: ``inverse(pose, current, limits)`` -> Solution tuples
    poses       (N, 4, 4) tool poses in the world frame, in the arm's length unit
    start       the joint readings the arm is at before the first pose (the arm's units)
    weights     per-joint weights of the distance sqrt(sum w_j (a_j - b_j)^2) (default all 1)
    singular_threshold   a conditioning measure below it flags "near a singularity"
    on_change   "stop": at a step with no solution of the kept configuration, stop (the rest are
                not solved); "switch": take the nearest solution of any configuration, flag it,
                and keep that configuration from there on
    max_step    flag a step where any joint changes by more than this (the arm's units), or None
    limits      passed to ``inverse``: "drop" (default) keeps solutions within the joint limits
    joint_units per-joint unit names used in the event texts (default: none)
    """
    poses = np.asarray(poses, dtype=float)
    if poses.ndim != 3 or poses.shape[1:] != (4, 4):
        raise ValueError(f"poses must have shape (N, 4, 4), not {poses.shape}")
    start = np.asarray(start, dtype=float)
    joint_names = tuple(getattr(module, "JOINT_NAMES", ())) or tuple(f"j{i + 1}" for i in range(len(start)))
    dof = len(joint_names)
    if start.shape != (dof,) or not np.all(np.isfinite(start)):
        raise ValueError(f"start must hold {dof} finite joint readings")
    if weights is not None:
        weights = np.asarray(weights, dtype=float)
        if weights.shape != (dof,) or not np.all(np.isfinite(weights)) or np.any(weights < 0) or not weights.any():
            raise ValueError(f"weights must be {dof} finite numbers >= 0, not all 0")
    if on_change not in ON_CHANGE:
        raise ValueError(f"on_change must be one of {ON_CHANGE}, not {on_change!r}")
    if not singular_threshold >= 0:
        raise ValueError("singular_threshold must be >= 0")
    condition_names = tuple(getattr(module, "CONDITION_NAMES", ()))
    label_names = tuple(getattr(module, "LABEL_NAMES", ()))
    label_values = tuple(getattr(module, "LABEL_VALUES", ()))
    units = list(joint_units) if joint_units is not None else [""] * dof

    def amount(value, j) -> str:
        return f"{value:.4g}{(' ' + units[j]) if units[j] else ''}"

    # A label and the measure of the same name: the label's value sets the measure's sign, so the
    # signed measure moves continuously through 0 where the continuous motion changes the label.
    signed_branches = []
    for b, name in enumerate(label_names):
        if name in condition_names and b < len(label_values) and len(label_values[b]) == 2:
            signed_branches.append((b, condition_names.index(name), name))

    def signed(solution, b, m) -> float:
        value = float(solution[3][m])
        return value if solution[1][b] == label_values[b][0] else -value

    def matches(solution, config) -> bool:
        """Same configuration; a branch exactly at its singular set matches either label."""
        for b, (have, want) in enumerate(zip(solution[1], config)):
            if have == want:
                continue
            name = label_names[b] if b < len(label_names) else None
            if name in condition_names and float(solution[3][condition_names.index(name)]) <= EXACTLY_SINGULAR:
                continue
            return False
        return True

    def walk(pose_a, pose_b, reference, m):
        """Follow the solution nearest the previous one over REFINE poses on the straight line
        between two poses and on to ``pose_b``: (smallest measure m on the way, True when no
        sub-step moves a joint by more than a quarter of the whole change, the end solution)."""
        smallest, largest, found = math.inf, 0.0, None
        start_q = reference
        for pose in list(straight_line(pose_a, pose_b, REFINE + 2)[1:-1]) + [pose_b]:
            found, _ = nearest(list(module.inverse(pose, tuple(float(v) for v in reference), limits)), reference)
            if found is None:
                return smallest, False, None
            q = np.asarray(found[0], dtype=float)
            smallest = min(smallest, float(found[3][m]))
            largest = max(largest, float(np.max(np.abs(q - reference))))
            reference = q
        total = float(np.max(np.abs(reference - start_q)))
        return smallest, largest <= 0.25 * total + 1e-9, found

    def nearest(solutions, reference):
        best, best_d = None, 0.0
        for s in solutions:                         # first of equals wins (the solver's order)
            d = _distance(s[0], reference, weights)
            if best is None or d < best_d:
                best, best_d = s, d
        return best, best_d

    n = len(poses)
    joints = np.full((n, dof), np.nan)
    conditioning = np.full((n, len(condition_names)), np.nan)
    steps = np.full((n, dof), np.nan)
    status: list[str] = [""] * n
    configs: list = [None] * n
    events: list[Event] = []
    kept = None
    previous = start.copy()
    previous_index = None            # index of the last solved step
    previous_solution = None
    last_sign: dict[int, float] = {}  # branch -> sign of the signed measure along the chosen path
    approach = None
    stopped_at = None

    for i, pose in enumerate(poses):
        if stopped_at is not None:
            status[i] = STOPPED
            continue
        current = tuple(float(v) for v in previous)
        solutions = list(module.inverse(pose, current, limits))
        if not solutions:
            if limits != "ignore" and list(module.inverse(pose, current, "ignore")):
                status[i] = OUT_OF_LIMITS
                events.append(Event(i, OUTSIDE_LIMITS, "the pose has solutions, but none within the joint limits"))
            else:
                status[i] = UNREACHABLE
                events.append(Event(i, LEAVES_WORKSPACE, "no solution: the pose is out of the arm's reach"))
            continue
        continuous, _ = nearest(solutions, previous)
        consecutive = previous_index is not None and previous_index == i - 1

        # The signed measure of the motion nearest the previous step changes sign: a crossing when
        # the measure comes near 0 between the two steps, else only the label's name changed.
        crossed, renamed = [], []
        if consecutive:
            for b, m, name in signed_branches:
                value = signed(continuous, b, m)
                if b not in last_sign or value == 0.0 or math.copysign(1.0, value) == last_sign[b]:
                    continue
                low = min(abs(value), float(previous_solution[3][m]))
                smallest, smooth, end = walk(poses[i - 1], pose, previous, m)
                if min(low, smallest) < crossing_window:
                    crossed.append(name)
                elif smooth and end is not None and end[1][b] == continuous[1][b]:
                    renamed.append((b, name, min(low, smallest)))
                # else: the nearest solution is no continuation of the previous one (it was lost to a
                # joint limit, say); the rule below decides.
        if renamed and kept is not None:
            relabelled = list(kept)
            for b, name, low in renamed:
                relabelled[b] = continuous[1][b]
            texts = [f"{name} {kept[b]} -> {continuous[1][b]}" for b, name, _ in renamed]
            events.append(Event(i, LABEL_CHANGE, f"{', '.join(texts)} while the measure stays >= "
                                f"{min(low for _, _, low in renamed):.3g} (no singularity between the steps): the "
                                f"arm keeps its configuration under a new name", tuple(nm for _, nm, _ in renamed)))
            kept = tuple(relabelled)

        state = SOLVED
        if kept is None:
            chosen = continuous
            kept = tuple(chosen[1])
        else:
            same = [s for s in solutions if matches(s, kept)]
            if same:
                chosen, _ = nearest(same, previous)
            else:
                chosen = None
        if crossed:
            change = np.abs(np.asarray(continuous[0], dtype=float) - previous)
            j = int(np.argmax(change))
            names = ", ".join(f"{name} {label_values[b][0 if last_sign[b] > 0 else 1]} -> {continuous[1][b]}"
                              for b, _, name in signed_branches if name in crossed)
            text = (f"the motion nearest the previous step changes {names} (largest joint change "
                    f"{joint_names[j]} {amount(change[j], j)})")
            if chosen is not None and chosen is not continuous:
                kept_change = np.abs(np.asarray(chosen[0], dtype=float) - previous)
                k = int(np.argmax(kept_change))
                text += f"; keeping the configuration moves {joint_names[k]} by {amount(kept_change[k], k)} instead"
            events.append(Event(i, CROSSES_SINGULARITY, text, tuple(crossed)))
        if chosen is None:
            text = (f"no solution in the kept configuration ({describe_config(kept, label_names)}); nearest "
                    f"other: {describe_config(continuous[1], label_names)}")
            if on_change == "stop":
                events.append(Event(i, CONFIGURATION_CHANGE, text + "; the path stops here"))
                status[i] = CHANGE_NEEDED
                stopped_at = i
                continue
            events.append(Event(i, CONFIGURATION_CHANGE, text + "; switched to it"))
            chosen, kept, state = continuous, tuple(continuous[1]), SWITCHED
        q = np.asarray(chosen[0], dtype=float)
        for b, m, name in signed_branches:
            value = signed(chosen, b, m)
            if value != 0.0:
                last_sign[b] = math.copysign(1.0, value)

        measures = [float(v) for v in chosen[3]]
        low = [(name, v) for name, v in zip(condition_names, measures) if v < singular_threshold]
        if low:
            text = ", ".join(f"{name} {v:.3g}" for name, v in low) + f" (below {singular_threshold:g})"
            events.append(Event(i, NEAR_SINGULARITY, text, tuple(name for name, _ in low)))

        if consecutive:
            steps[i] = np.abs(q - previous)
            if max_step is not None and np.any(steps[i] > max_step):
                j = int(np.argmax(steps[i]))
                events.append(Event(i, LARGE_STEP, f"{joint_names[j]} moves {amount(steps[i][j], j)} "
                                    f"(more than {max_step:g})", (joint_names[j],)))
        elif previous_index is not None:
            change = np.abs(q - previous)
            j = int(np.argmax(change))
            events.append(Event(i, RESUMES, f"solved again after step {previous_index + 1}; largest change since: "
                                f"{joint_names[j]} {amount(change[j], j)}"))
        else:
            approach = np.abs(q - start)

        joints[i] = q
        conditioning[i] = measures
        configs[i] = tuple(chosen[1])
        status[i] = state
        previous, previous_index, previous_solution = q, i, chosen

    first = next((c for c in configs if c is not None), None)
    final = next((c for c in reversed(configs) if c is not None), None)
    return PathResult(joints=joints, status=status, configs=configs, conditioning=conditioning, steps=steps,
                      events=events, start=start, kept=first, final=final, joint_names=joint_names,
                      condition_names=condition_names, label_names=label_names, threshold=singular_threshold,
                      on_change=on_change, approach=approach, stopped_at=stopped_at)
