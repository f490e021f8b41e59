"""A compiled C solver with the generated Python solver's API (forward, inverse, nearest).

``ikgen compile ARM -o DIR`` copies this file, unchanged, into DIR as ``<arm>_ik_c.py`` (or
``<arm>_ik_f32_c.py`` for the float build) beside the cffi extension it built and a JSON file
of the same stem that holds the arm's constants. From Python, one line gives the solver:

    import sys; sys.path.insert(0, "DIR"); import packer6_ik_c as ik

and then ``ik.inverse(pose)``, ``ik.nearest(pose, current, config={"elbow": "elbow_up"})``,
``ik.forward(joints)``, ``ik.distance``, ``ik.sort_nearest`` and the constants (JOINT_NAMES,
LABEL_NAMES, LABEL_VALUES, CONDITION_NAMES, JOINT_LIMITS, MAX_SOLUTIONS, ...) behave as in the
generated ``<arm>_ik.py``; the solving runs in C. Only the standard library and cffi's
extension are needed at run time (not ikgen, not numpy). ``lib`` and ``ffi`` give the raw C
functions.

Inside the ikgen package this module binds nothing (there is no JSON file beside it).
"""

import importlib.machinery
import importlib.util
import json
import math
import os
import struct

LIMIT_MODES = {"drop": 0, "flag": 1, "ignore": 2}
POSE_FORM = "a 4x4 or 3x4 row-major matrix of real numbers (nested lists or tuples, or a numpy array)"


# Input checks, the same as the generated Python solver's: wrong shapes and types raise ValueError
# saying what is expected (docs/solvers.md, "Bad input").

def shown(value):
    """What a value is, briefly, for an error message."""
    if hasattr(value, "shape"):
        return f"an array of shape {tuple(value.shape)}"
    if isinstance(value, (list, tuple)):
        return f"a {type(value).__name__} of {len(value)} items"
    return f"an object of type {type(value).__name__}"


def real(value, what):
    """``value`` as a float; ValueError unless it is a real number (int, float or a numpy real)."""
    if isinstance(value, float):
        return float(value)
    if (isinstance(value, int) and not isinstance(value, bool)) or \
            getattr(getattr(value, "dtype", None), "kind", None) in ("f", "i", "u"):
        try:
            return float(value)
        except OverflowError:      # an integer beyond the float range
            return math.inf if value > 0 else -math.inf
    raise ValueError(f"{what} must be real numbers (int or float), not {shown(value)}")


def vector(values, size, what):
    """``values`` as a list of ``size`` floats; ValueError unless a sequence of that many real numbers."""
    if hasattr(values, "tolist"):
        values = values.tolist()
    if not isinstance(values, (list, tuple)) or len(values) != size:
        raise ValueError(f"{what} must be a sequence of {size} real numbers, not {shown(values)}")
    return [real(v, what) for v in values]


def size_of(values):
    """The length of a list, tuple or one-dimensional array (-1 for anything else); the functions
    below use it where no arm is bound (JOINT_COUNT comes from the JSON file beside a copy)."""
    if hasattr(values, "tolist"):
        values = values.tolist()
    return len(values) if isinstance(values, (list, tuple)) else -1


_ROWS = (list, tuple)
_FLOATS = {float}


def pose_entries(pose):
    """The 16 entries of a 4x4 (or 3x4, completed) pose, row-major; ValueError unless the shape and
    types are right."""
    if type(pose) in _ROWS and len(pose) in (3, 4):          # the common case, checked quickly
        r0, r1, r2 = pose[0], pose[1], pose[2]
        if type(r0) in _ROWS and type(r1) in _ROWS and type(r2) in _ROWS and len(r0) == len(r1) == len(r2) == 4:
            flat = [*r0, *r1, *r2]
            if set(map(type, flat)) == _FLOATS:
                flat += (0.0, 0.0, 0.0, 1.0)
                return flat
    what = shown(pose)
    if hasattr(pose, "tolist"):
        pose = pose.tolist()
    if not isinstance(pose, (list, tuple)) or len(pose) not in (3, 4) or \
            not all(isinstance(row, (list, tuple)) and len(row) == 4 for row in pose):
        raise ValueError(f"pose must be {POSE_FORM}, not {what}")
    rows = [[real(v, "pose entries") for v in row] for row in pose[:3]]
    return [v for row in rows for v in row] + [0.0, 0.0, 0.0, 1.0]


def given_arguments(has_given, args, kwargs):
    """(given, args, kwargs): a solver of an arm with a given joint takes that joint's reading right
    after the pose (positionally or as ``given=``); the rest of the call is returned unchanged."""
    if not has_given:
        return (), args, kwargs
    if args:
        return (real(args[0], "given"),), args[1:], kwargs
    if "given" in kwargs:
        kwargs = dict(kwargs)
        return (real(kwargs.pop("given"), "given"),), args, kwargs
    raise ValueError("given must be the given joint's reading (a real number), right after the pose")


CRITERIA = ("nearest", "limits", "conditioning")


def check_criterion(criterion, current, dof: int) -> None:
    """choose_given's criterion, and the current reading the 'nearest' one needs: ValueError if wrong."""
    if criterion not in CRITERIA:
        raise ValueError(f"criterion must be one of {', '.join(CRITERIA)}, not {criterion!r:.80}")
    if criterion == "nearest" and current is None:
        raise ValueError(f"criterion 'nearest' needs current: a sequence of {dof} real numbers")


def limits_mode(limits):
    """The C limits mode; ValueError unless 'drop', 'flag' or 'ignore'."""
    if not isinstance(limits, str) or limits not in LIMIT_MODES:
        raise ValueError(f"limits must be 'drop', 'flag' or 'ignore', not {limits!r:.80}")
    return LIMIT_MODES[limits]


def readings(current, size):
    """Readings for ``current``: ValueError unless a sequence of ``size`` real numbers; a NaN or
    infinite entry counts as no reading (0), as in C."""
    if current is None:
        raise ValueError(f"current must be a sequence of {size} real numbers, not None")
    return [v if v - v == 0.0 else 0.0 for v in vector(current, size, "current")]


def wanted_config(config, label_names, label_values):
    """``config`` checked: None, a dict {label name: value} or a sequence of values (None: any)."""
    if config is None:
        return None
    if isinstance(config, dict):
        items = list(config.items())
    elif isinstance(config, (list, tuple)) and len(config) == len(label_names):
        items = [(name, value) for name, value in zip(label_names, config) if value is not None]
    else:
        raise ValueError(f"config must be a dict (label name: value) or a sequence of {len(label_names)} values "
                         f"(None for any), not {shown(config)}")
    for name, value in items:
        if name not in label_names:
            raise ValueError(f"config names a label {name!r:.80}; the labels are {', '.join(label_names)}")
        values = tuple(label_values[label_names.index(name)])
        if value not in values:
            raise ValueError(f"label {name!r} takes one of {values}, not {value!r:.80}")
    return config


class Solution(tuple):
    """(joints, config, singular, conditioning, within_limits), as in the generated Python solver."""

    __slots__ = ()

    @property
    def joints(self):
        return self[0]

    @property
    def config(self):
        return self[1]

    @property
    def singular(self):
        return self[2]

    @property
    def conditioning(self):
        return self[3]

    @property
    def within_limits(self):
        return self[4]


def _load_extension(folder, name):
    """The cffi extension module ``name`` from ``folder`` (found by file, so that the folder
    need not be on sys.path)."""
    for suffix in importlib.machinery.EXTENSION_SUFFIXES:
        path = os.path.join(folder, name + suffix)
        if os.path.isfile(path):
            spec = importlib.util.spec_from_file_location(name, path)
            module = importlib.util.module_from_spec(spec)
            spec.loader.exec_module(module)
            return module
    raise ImportError(f"the compiled extension {name} is not in {folder}; run `ikgen compile` again")


class SolutionReader:
    """Reads solutions back from a C array of ``<prefix>_solution`` in one pass: the struct as a
    struct-module format (its fields at their offsets, padding skipped), and the configuration of
    every sign pattern of the labels from a table built once."""

    def __init__(self, ffi, type_name, real_name, dof, labels, conditions, make=tuple):
        self.ffi, self.make = ffi, make
        code = "d" if real_name == "double" else "f"
        fields = [("joints", code * dof), ("labels", "b" * len(labels)), ("singular", "i"),
                  ("conditioning", code * conditions), ("within_limits", "i")]
        layout, at, index, slices = "=", 0, 0, {}
        for name, codes in sorted(fields, key=lambda f: ffi.offsetof(type_name, f[0])):
            offset = ffi.offsetof(type_name, name)
            layout += "x" * (offset - at) + codes
            at = offset + struct.calcsize("=" + codes)
            slices[name] = slice(index, index + len(codes))
            index += len(codes)
        self.record = struct.Struct(layout + "x" * (ffi.sizeof(type_name) - at))
        self.joints, self.labels, self.conditioning = slices["joints"], slices["labels"], slices["conditioning"]
        self.singular, self.within = slices["singular"].start, slices["within_limits"].start
        patterns = [()]
        for positive, negative in labels:
            patterns = [p + (v,) for p in patterns for v in ((1, positive), (-1, negative))]
        self.configs = {tuple(sign for sign, _ in p): tuple(word for _, word in p) for p in patterns}

    def read(self, array, count):
        configs, labels, joints, conditioning = self.configs, self.labels, self.joints, self.conditioning
        singular, within = self.singular, self.within
        out = []
        for values in self.record.iter_unpack(self.ffi.buffer(array, count * self.record.size)):
            signs = values[labels]       # the solver writes each label as +1 or -1: the table's keys
            config = configs[signs] if signs in configs else configs[tuple(1 if v > 0 else -1 for v in signs)]
            out.append((values[joints], config, values[singular] != 0, values[conditioning], values[within] != 0))
        return out if self.make is tuple else [self.make(solution) for solution in out]


class CompiledSolver:
    """The C functions of one compiled solver behind the Python solver's functions.

    Per call it allocates only the C arrays it passes (types are resolved once, so a call is
    safe from several threads) and reads the solutions back with ``ffi.unpack``; configurations
    come from a table built once."""

    def __init__(self, spec, extension):
        ffi = self.ffi = extension.ffi
        self.lib = extension.lib
        self.spec = spec
        prefix = spec["prefix"]
        self.real = spec["real"]
        self.dof = spec["JOINT_COUNT"]
        self.most = spec["MAX_SOLUTIONS"]
        self.labels = [tuple(values) for values in spec["LABEL_VALUES"]]
        self.conditions = len(spec["CONDITION_NAMES"])
        self.status_names = tuple(spec.get("STATUS_NAMES", ("ok", "unreachable", "invalid_input")))
        self.given = spec.get("GIVEN_JOINT")
        self._pose_type = ffi.typeof(f"{self.real}[16]")
        self._vector_type = ffi.typeof(f"{self.real}[3]")
        self._joints_type = ffi.typeof(f"{self.real}[{self.dof}]")
        self._out_type = ffi.typeof(f"{prefix}_solution[{self.most}]")
        self._status_type = ffi.typeof(f"{prefix}_status *")
        self._forward = getattr(self.lib, f"{prefix}_forward")
        self._inverse = getattr(self.lib, f"{prefix}_inverse")
        # the readings-only entry (solvers whose target is the whole pose or a point have it)
        self._readings = getattr(self.lib, f"{prefix}_inverse_joints", None)
        self._rows_type = ffi.typeof(f"{self.real}[{self.most}][{self.dof}]")
        self._flat_type = ffi.typeof(f"{self.real} *")
        self._natural = {name: getattr(self.lib, f"{prefix}_{name}", None)
                         for name in ("inverse_point", "inverse_point_angle", "inverse_point_direction")}
        self._reader = SolutionReader(ffi, f"{prefix}_solution", self.real, self.dof, self.labels,
                                      self.conditions, Solution)

    def _array(self, values, size, what):
        return self.ffi.new(f"{self.real}[{size}]", vector(values, size, what))

    def _pose(self, pose):
        return self.ffi.new(self._pose_type, pose_entries(pose))

    def _current(self, current):
        return self.ffi.NULL if current is None else self._array(current, self.dof, "current")

    def forward(self, joints):
        joints = vector(joints, self.dof, "joints")
        if sum(joints) - sum(joints) != 0.0:
            raise ValueError(f"joints must be finite numbers, not {joints}")
        pose = self.ffi.new(self._pose_type)
        self._forward(self._array(joints, self.dof, "joints"), pose)
        values = self.ffi.unpack(pose, 16)
        return [values[0:4], values[4:8], values[8:12], values[12:16]]

    def _run(self, call, args, current, limits, with_status):
        mode = limits_mode(limits)
        out = self.ffi.new(self._out_type)
        status = self.ffi.new(self._status_type)
        count = call(*args, self._current(current), mode, out, status)
        solutions = self._reader.read(out, count)
        return (solutions, self.status_names[status[0]]) if with_status else solutions

    def inverse(self, pose, *args, **kwargs):
        """inverse(pose, [given,] current=None, limits="drop", with_status=False)."""
        given, args, kwargs = given_arguments(self.given, args, kwargs)
        return self._inverse_pose(pose, given, *args, **kwargs)

    def _inverse_pose(self, pose, given, current=None, limits="drop", with_status=False):
        return self._run(self._inverse, (self._pose(pose), *given), current, limits, with_status)

    def inverse_joints(self, pose, *args, **kwargs):
        """inverse_joints(pose, [given,] current=None): the readings of every closed-form solution,
        a tuple each, from the C readings-only entry (the full call with limits ignored where the
        solver has none)."""
        given, args, kwargs = given_arguments(self.given, args, kwargs)
        current = kwargs.pop("current", args[0] if args else None)
        if self._readings is None:
            return [s[0] for s in self._inverse_pose(pose, given, current, "ignore")]
        rows = self.ffi.new(self._rows_type)
        count = self._readings(self._pose(pose), *given, self._current(current), rows)
        values, dof = self.ffi.unpack(self.ffi.cast(self._flat_type, rows), count * self.dof), self.dof
        return [tuple(values[k * dof:(k + 1) * dof]) for k in range(count)]

    def choose_given(self, pose, current=None, criterion="nearest", weights=None, config=None, step=None,
                     limits="drop", wanted=None):
        """(reading, Solution) best by ``criterion`` (the generated Python solver's choose_given), or None."""
        check_criterion(criterion, current, self.dof)
        step = self.spec["GIVEN_STEP"] if step is None else real(step, "step")
        if not 0.0 < step < math.inf:
            raise ValueError(f"step must be a positive finite number, not {step!r:.80}")
        best = self.ffi.new(f"{self.spec['prefix']}_solution *")
        value = self.ffi.new(f"{self.real} *")
        status = self.ffi.new(self._status_type)
        weights = self.ffi.NULL if weights is None else self._array(weights, self.dof, "weights")
        found = getattr(self.lib, f"{self.spec['prefix']}_choose_given")(
            self._pose(pose), self._current(current), weights, wanted if wanted is not None else self.ffi.NULL,
            CRITERIA.index(criterion), step, limits_mode(limits), best, value, status)
        return (float(value[0]), self._reader.read(best, 1)[0]) if found else None

    def _vector(self, values, what):
        return self.ffi.new(self._vector_type, vector(values, 3, what))

    def inverse_point(self, point, current=None, limits="drop", with_status=False):
        return self._run(self._natural["inverse_point"], (self._vector(point, "point"),), current, limits,
                         with_status)

    def inverse_point_angle(self, point, angle, current=None, limits="drop", with_status=False):
        return self._run(self._natural["inverse_point_angle"], (self._vector(point, "point"), real(angle, "angle")),
                         current, limits, with_status)

    def inverse_point_direction(self, point, direction, current=None, limits="drop", with_status=False):
        return self._run(self._natural["inverse_point_direction"],
                         (self._vector(point, "point"), self._vector(direction, "direction")), current, limits,
                         with_status)


def distance(a, b, weights=None):
    """Weighted Euclidean distance between two joint vectors, in reading units (ValueError unless
    both, and ``weights``, are sequences of real numbers of the same length)."""
    a = vector(a, globals().get("JOINT_COUNT", size_of(a)), "joint vectors")
    b = vector(b, len(a), "joint vectors")
    if weights is not None:
        weights = vector(weights, len(a), "weights")
    if weights is None:
        return math.sqrt(sum((x - y) * (x - y) for x, y in zip(a, b)))
    return math.sqrt(sum(w * (x - y) * (x - y) for x, y, w in zip(a, b, weights)))


def sort_nearest(solutions, current, weights=None):
    """The solutions ordered by distance from ``current`` (ties keep their order)."""
    if not isinstance(solutions, (list, tuple)) or not all(isinstance(s, (tuple, list)) and s for s in solutions):
        raise ValueError(f"solutions must be a list of solutions (tuples whose first item is the readings), not {shown(solutions)}")
    current = readings(current, globals().get("JOINT_COUNT", size_of(current)))
    return sorted(solutions, key=lambda s: distance(s[0], current, weights))


def _matches(config, wanted, label_names):
    if wanted is None:
        return True
    if isinstance(wanted, dict):
        return all(config[label_names.index(name)] == value for name, value in wanted.items())
    return all(w is None or w == c for c, w in zip(config, wanted))


def _bind(namespace, spec_path):
    """Fill ``namespace`` (this module's globals) with the solver described by ``spec_path``."""
    with open(spec_path, encoding="utf-8") as stream:
        spec = json.load(stream)
    solver = CompiledSolver(spec, _load_extension(os.path.dirname(spec_path), spec["extension"]))
    label_names = tuple(spec["LABEL_NAMES"])

    def nearest(pose, *args, **kwargs):
        """nearest(pose, [given,] current, weights=None, config=None, limits="drop")."""
        given, args, kwargs = given_arguments(solver.given, args, kwargs)
        return _nearest(pose, given, *args, **kwargs)

    def _nearest(pose, given, current, weights=None, config=None, limits="drop"):
        """The solution closest to ``current`` (of configuration ``config`` if given: a dict such
        as {"elbow": "elbow_up"} or a sequence with None for 'any'), or None when there is none."""
        current = readings(current, solver.dof)
        config = wanted_config(config, label_names, spec["LABEL_VALUES"])
        if weights is not None:
            weights = vector(weights, solver.dof, "weights")
        best, best_distance = None, 0.0
        for solution in solver.inverse(pose, *given, current, limits):
            if not _matches(solution[1], config, label_names):
                continue
            d = distance(solution[0], current, weights)
            if best is None or d < best_distance:
                best, best_distance = solution, d
        return best

    for key, value in spec.items():
        if key.isupper():
            namespace[key] = tuple(tuple(v) if isinstance(v, list) else v for v in value) \
                if isinstance(value, list) else value
    namespace.update(forward=solver.forward, inverse=solver.inverse, nearest=nearest, ffi=solver.ffi,
                     lib=solver.lib, solver=solver, inverse_joints=solver.inverse_joints)
    if solver.given is not None:
        def choose_given(pose, current=None, criterion="nearest", weights=None, config=None, step=None, limits="drop"):
            """(reading, Solution): the given joint's reading and solution best by ``criterion`` (see
            the generated Python solver), or None."""
            config = wanted_config(config, label_names, spec["LABEL_VALUES"])
            wanted = None
            if config is not None:
                items = config.items() if isinstance(config, dict) else zip(label_names, config)
                signs = [0] * len(label_names)
                for name, value in items:
                    if value is not None:
                        signs[label_names.index(name)] = 1 if value == spec["LABEL_VALUES"][label_names.index(name)][0] else -1
                wanted = solver.ffi.new("signed char[]", signs)
            return solver.choose_given(pose, current, criterion, weights, None, step, limits, wanted)
        namespace["choose_given"] = choose_given
    for name, function in solver._natural.items():      # the target's own inputs, where the C has them
        if function is not None:
            namespace[name] = getattr(solver, name)


_SPEC = os.path.splitext(os.path.abspath(__file__))[0] + ".json"
if os.path.isfile(_SPEC):      # a copy beside a compiled solver; ikgen's own copy binds nothing
    _bind(globals(), _SPEC)
