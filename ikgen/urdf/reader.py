"""Reading a URDF file safely, and extracting one serial chain from its link tree.

Order of work, so that hostile or broken input never reaches the URDF library:

1. the bytes: the file must exist, end in ``.urdf``, hold at most ``MAX_URDF_BYTES`` (checked
   before reading) and no NUL bytes;
2. a defused XML parse (defusedxml on the standard library's expat): any DOCTYPE is refused, so
   entity expansion ("billion laughs"), external entities and external DTDs never happen; the
   elements keep their line numbers for messages;
3. the kinematic elements (``<robot>``, ``<link>``, ``<joint>`` with its ``<parent>``,
   ``<child>``, ``<origin>``, ``<axis>``, ``<limit>``) are checked for what the library would
   crash on or silently accept: missing names, numbers that are not three finite numbers;
4. only then the URDF library (yourdfpy) parses the same bytes into its model, whose joint
   origins, axes and limits the conversion uses;
5. the link tree: every joint names defined links, no link has two parents, no cycles; the
   chain from the root link to the tip link (defaults: the tree's root and its only leaf).

Every problem is an ``ArmFileError`` naming the file, the line when known, the joint or link,
and what was expected.
"""

from __future__ import annotations

import difflib
import hashlib
import io
import logging
import math
import xml.etree.ElementTree as ElementTree
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import ArmFileError, IkgenError

MAX_URDF_BYTES = 16 * 1024 * 1024   # a URDF holds no meshes; real ones are well below 1 MiB
JOINT_TYPES = ("revolute", "continuous", "prismatic", "fixed", "floating", "planar")
CHAIN_TYPES = ("revolute", "continuous", "prismatic", "fixed")
MAX_MAGNITUDE = 1e6         # origin and axis numbers: metres and radians of any real robot are far below
EXTRA_HINT = "URDF input needs the optional URDF support: pip install \"ikgen[urdf]\""


class MissingExtra(IkgenError):
    """The optional URDF libraries are not installed."""


@dataclass(frozen=True)
class ChainJoint:
    """One URDF joint on the chain, as the URDF library parsed it (metres, radians)."""

    name: str
    kind: str                   # revolute, continuous, prismatic or fixed
    parent: str
    child: str
    origin: np.ndarray          # 4x4: parent link frame <- joint frame (= child frame at zero)
    axis: np.ndarray            # 3, as written (not normalised), in the joint frame
    lower: float | None
    upper: float | None
    line: int | None


@dataclass(frozen=True)
class Chain:
    robot: str
    root: str
    tip: str
    joints: tuple[ChainJoint, ...]   # root to tip, fixed joints included
    digest: str


def import_extra(module: str):
    """Import one of the optional URDF libraries, or say which extra to install."""
    try:
        return __import__(module, fromlist=["_"])
    except ImportError:
        raise MissingExtra(f"{EXTRA_HINT} (the Python module '{module}' is missing)") from None


# ------------------------------------------------------------------------------ the bytes

def read_at_most(stream, limit: int) -> bytes:
    """Up to ``limit`` bytes, in 1 MiB pieces (read(limit) would allocate all of ``limit`` at once)."""
    chunks, total = [], 0
    while total < limit:
        chunk = stream.read(min(1 << 20, limit - total))
        if not chunk:
            break
        chunks.append(chunk)
        total += len(chunk)
    return b"".join(chunks)


def read_urdf_bytes(path: Path) -> bytes:
    shown = str(path)
    expected = "a readable .urdf file"
    try:
        if not path.exists():
            raise ArmFileError(shown, "", "file not found", "a path to an existing .urdf file")
        if path.is_dir():
            raise ArmFileError(shown, "", "is a directory", "a .urdf file")
        size = path.stat().st_size
        if size > MAX_URDF_BYTES:
            raise ArmFileError(shown, "", f"the file has {size} bytes",
                               f"a URDF of at most {MAX_URDF_BYTES} bytes (16 MiB)")
        with path.open("rb") as stream:
            raw = read_at_most(stream, MAX_URDF_BYTES + 1)   # the file may have grown since stat()
    except OSError as exc:
        raise ArmFileError(shown, "", f"cannot read the file: {exc.strerror or exc}", expected) from None
    if len(raw) > MAX_URDF_BYTES:
        raise ArmFileError(shown, "", f"the file has more than {MAX_URDF_BYTES} bytes",
                           f"a URDF of at most {MAX_URDF_BYTES} bytes (16 MiB)")
    if not raw.strip():
        raise ArmFileError(shown, "", "the file is empty", "a URDF robot description")
    if b"\x00" in raw:
        raise ArmFileError(shown, "", "the file holds binary data (NUL bytes)", "an XML text file")
    return raw


# ------------------------------------------------------------------- defused XML, with lines

def safe_tree(raw: bytes, shown: str):
    """The element tree of ``raw`` and {id(element): line}, refusing DTDs and entities."""
    defused = import_extra("defusedxml.ElementTree")
    common = import_extra("defusedxml.common")

    lines: dict[int, int] = {}

    class LineBuilder(ElementTree.TreeBuilder):
        def start(self, tag, attrs):
            element = super().start(tag, attrs)
            lines[id(element)] = parser.parser.CurrentLineNumber
            return element

    parser = defused.DefusedXMLParser(target=LineBuilder(), forbid_dtd=True, forbid_entities=True,
                                      forbid_external=True)
    try:
        parser.feed(raw)
        root = parser.close()
    except common.DTDForbidden:
        raise ArmFileError(shown, "", "the file has a DOCTYPE declaration, refused for safety (it can define "
                           "entities that expand without bound or read other files)",
                           "a URDF without <!DOCTYPE ...> (expand xacro files before reading them)") from None
    except common.DefusedXmlException as exc:
        raise ArmFileError(shown, "", f"refused for safety: {type(exc).__name__}",
                           "a URDF without entities or external references") from None
    except ElementTree.ParseError as exc:
        line, column = getattr(exc, "position", (None, None))
        message = str(exc).split(":")[0]
        raise ArmFileError(shown, "", f"malformed XML: {message} at column {column}", "well-formed XML",
                           line=line) from None
    except (RecursionError, MemoryError):
        raise ArmFileError(shown, "", "the XML is nested too deeply", "a URDF robot description") from None
    return root, lines


# --------------------------------------------------------------- kinematic elements, checked

class ElementChecker:
    """Checks the elements the conversion depends on; messages carry the element's line."""

    def __init__(self, shown: str, lines: dict[int, int]):
        self.shown = shown
        self.lines = lines

    def fail(self, element, where: str, problem: str, expected: str | None = None):
        raise ArmFileError(self.shown, where, problem, expected, line=self.lines.get(id(element)))

    def name(self, element, what: str) -> str:
        value = element.get("name")
        if value is None or not value.strip():
            self.fail(element, f"<{what}>", "has no 'name' attribute", f"<{what} name=\"...\">")
        return value

    def numbers(self, element, attribute: str, where: str, default: str | None, bounded: bool = True) -> None:
        text = element.get(attribute, default)
        if text is None:
            self.fail(element, where, f"<{element.tag}> has no '{attribute}' attribute", "a number")
        words = text.split()
        count = 3 if attribute in ("xyz", "rpy") else 1
        shown = f"<{element.tag} {attribute}=\"{text}\">"
        if len(words) != count:
            self.fail(element, where, f"{shown} holds {len(words)} value(s)",
                      f"{count} number(s)" + (" separated by spaces" if count > 1 else ""))
        for word in words:
            try:
                value = float(word)
            except ValueError:
                self.fail(element, where, f"{shown}: '{word}' is not a number", "finite numbers")
            if not math.isfinite(value):
                self.fail(element, where, f"{shown}: '{word}' is not finite", "finite numbers")
            if bounded and abs(value) > MAX_MAGNITUDE:
                self.fail(element, where, f"{shown}: '{word}' is too large", f"numbers of magnitude at most "
                          f"{MAX_MAGNITUDE:g} (metres, radians)")

    def robot(self, root) -> None:
        if root.tag != "robot":
            self.fail(root, "", f"the top element is <{root.tag}>", "a URDF whose top element is <robot>")
        self.name(root, "robot")
        for link in root.findall("link"):
            self.name(link, "link")
        for joint in root.findall("joint"):
            self.joint(joint)

    def joint(self, joint) -> None:
        name = self.name(joint, "joint")
        where = f"joint '{name}'"
        kind = joint.get("type")
        if kind not in JOINT_TYPES:
            found = f"type '{kind}'" if kind is not None else "no 'type' attribute"
            self.fail(joint, where, f"has {found}", "one of " + ", ".join(JOINT_TYPES))
        for tag in ("parent", "child"):
            element = joint.find(tag)
            if element is None or not (element.get("link") or "").strip():
                self.fail(joint if element is None else element, where, f"has no <{tag} link=\"...\">",
                          f"exactly one <{tag} link=\"LINK\"/>")
        origin = joint.find("origin")
        if origin is not None:
            self.numbers(origin, "xyz", where, "0 0 0")
            self.numbers(origin, "rpy", where, "0 0 0")
        axis = joint.find("axis")
        if axis is not None:
            self.numbers(axis, "xyz", where, "1 0 0")
        limit = joint.find("limit")
        if limit is not None:
            for attribute in ("lower", "upper"):
                if limit.get(attribute) is not None:
                    self.numbers(limit, attribute, where, None, bounded=False)


# ------------------------------------------------------------------------------ the library

def library_model(raw: bytes, shown: str, xml_root):
    """The URDF library's model of the (already checked) bytes, holding the same links and joints
    as the checked XML (the library falls back to a recovering parser when its own XML parser
    gives up, for example on a text node beyond its size limit: that must not lose a joint)."""
    yourdfpy = import_extra("yourdfpy")
    library_log = logging.getLogger("yourdfpy")
    level = library_log.level
    library_log.setLevel(logging.CRITICAL)      # its parse errors become our message, not log lines
    try:
        model = yourdfpy.URDF.load(io.BytesIO(raw), build_scene_graph=False, build_collision_scene_graph=False,
                                   load_meshes=False, load_collision_meshes=False)
    except Exception as exc:  # the library's own errors vary: a readable message, never a traceback
        raise ArmFileError(shown, "", f"the URDF library could not read the file ({type(exc).__name__}: {exc})",
                           "a valid URDF robot description") from None
    finally:
        library_log.setLevel(level)
    for tag, parsed in (("link", model.robot.links), ("joint", model.robot.joints)):
        if sorted(e.get("name") for e in xml_root.findall(tag)) != sorted(item.name for item in parsed):
            raise ArmFileError(shown, "", f"the URDF library read other <{tag}> elements than the file holds",
                               "a URDF the library reads completely")
    return model


# ------------------------------------------------------------------------------- link tree

class LinkTree:
    """Parents and children of the links, checked to be a tree (or several)."""

    def __init__(self, model, elements: dict[str, object], checker: ElementChecker):
        self.checker = checker
        self.elements = elements                     # joint name -> XML element (for lines)
        self.links = [link.name for link in model.robot.links]
        self.joint_of: dict[str, object] = {}        # child link -> joint
        self.children: dict[str, list] = {name: [] for name in self.links}
        self.check_unique(model)
        for joint in model.robot.joints:
            self.add(joint)
        self.check_acyclic()
        self.roots = [name for name in self.links if name not in self.joint_of]

    def fail(self, joint_name: str | None, where: str, problem: str, expected: str | None = None):
        element = self.elements.get(joint_name)
        raise ArmFileError(self.checker.shown, where, problem, expected,
                           line=self.checker.lines.get(id(element)) if element is not None else None)

    def check_unique(self, model) -> None:
        seen = set()
        for name in self.links:
            if name in seen:
                self.fail(None, f"link '{name}'", "is defined twice", "each link name once")
            seen.add(name)
        seen = set()
        for joint in model.robot.joints:
            if joint.name in seen:
                self.fail(joint.name, f"joint '{joint.name}'", "is defined twice", "each joint name once")
            seen.add(joint.name)

    def add(self, joint) -> None:
        where = f"joint '{joint.name}'"
        for role, link in (("parent", joint.parent), ("child", joint.child)):
            if link not in self.children:
                close = difflib.get_close_matches(link, self.links, n=1)
                hint = f"; did you mean '{close[0]}'?" if close else ""
                self.fail(joint.name, where, f"its {role} link '{link}' is not defined by any <link>{hint}",
                          "a link name defined in the file")
        if joint.child in self.joint_of:
            other = self.joint_of[joint.child].name
            self.fail(joint.name, where, f"link '{joint.child}' is already the child of joint '{other}'",
                      "a tree: each link the child of at most one joint")
        self.joint_of[joint.child] = joint
        self.children[joint.parent].append(joint)

    def check_acyclic(self) -> None:
        done: set[str] = set()
        for start in self.links:
            path, link = [], start
            while link in self.joint_of and link not in done:
                if link in path:
                    cycle = path[path.index(link):] + [link]
                    joint = self.joint_of[link].name
                    self.fail(joint, f"link '{link}'", "the links form a cycle: "
                              + " <- ".join(f"'{l}'" for l in cycle), "a tree of links (no cycles)")
                path.append(link)
                link = self.joint_of[link].parent
            done.update(path)

    def leaves_below(self, root: str) -> list[str]:
        leaves, stack = [], [root]
        while stack:
            link = stack.pop()
            below = [j.child for j in self.children[link]]
            if not below:
                leaves.append(link)
            stack.extend(reversed(below))
        return leaves

    def known(self, link: str, what: str) -> str:
        if link not in self.children:
            close = difflib.get_close_matches(link, self.links, n=3)
            hint = f" (did you mean {', '.join(repr(c) for c in close)}?)" if close else ""
            raise ArmFileError(self.checker.shown, "", f"the {what} link '{link}' is not a link of the file{hint}",
                               "a link name defined by a <link> element")
        return link

    def pick_root(self, root: str | None) -> str:
        if root is not None:
            return self.known(root, "root")
        if len(self.roots) != 1:
            names = ", ".join(f"'{r}'" for r in self.roots)
            raise ArmFileError(self.checker.shown, "", f"the file has {len(self.roots)} root links "
                               f"(links that are no joint's child): {names}",
                               "one root link, or the chain's root named with --root-link")
        return self.roots[0]

    def pick_tip(self, root: str, tip: str | None) -> str:
        if tip is not None:
            return self.known(tip, "tip")
        leaves = self.leaves_below(root)
        if leaves == [root]:
            raise ArmFileError(self.checker.shown, "", f"link '{root}' has no joints below it",
                               "a root link with a chain of joints below it")
        if len(leaves) > 1:
            fork = root
            while len(self.children[fork]) == 1:
                fork = self.children[fork][0].child
            raise ArmFileError(self.checker.shown, "", f"the tree below '{root}' branches at link '{fork}': it has "
                               f"{len(leaves)} leaf links ({', '.join(repr(l) for l in leaves)})",
                               "the chain's tip link named with --tip-link, one of those or a link above them")
        return leaves[0]

    def joints_between(self, root: str, tip: str) -> list:
        joints, link = [], tip
        while link != root:
            if link not in self.joint_of:
                raise ArmFileError(self.checker.shown, "", f"link '{tip}' is not below link '{root}': going up "
                                   f"from '{tip}' ends at the root link '{link}'",
                                   "a tip link below the root link (or another --root-link)")
            joint = self.joint_of[link]
            joints.append(joint)
            link = joint.parent
        if not joints:
            raise ArmFileError(self.checker.shown, "", f"the root and the tip are the same link '{root}'",
                               "a tip link below the root link")
        return joints[::-1]


# ----------------------------------------------------------------------------- the chain

def chain_joint(joint, element, checker: ElementChecker) -> ChainJoint:
    where = f"joint '{joint.name}'"
    if joint.type not in CHAIN_TYPES:
        checker.fail(element, where, f"is a {joint.type} joint, which a serial chain of DH joints cannot hold",
                     "revolute, continuous, prismatic or fixed joints between the root and the tip")
    if element.find("mimic") is not None:
        checker.fail(element, where, f"mimics joint '{joint.mimic.joint}' (a coupled joint), which the chain "
                     "cannot hold", "independent joints between the root and the tip")
    origin = np.eye(4) if joint.origin is None else np.asarray(joint.origin, dtype=float)
    axis = np.asarray(joint.axis if joint.axis is not None else (1.0, 0.0, 0.0), dtype=float)
    lower = upper = None
    if joint.type != "fixed":
        norm = float(np.linalg.norm(axis))
        if not norm > 1e-9:
            checker.fail(element, where, f"its <axis xyz> {' '.join(map(repr, axis.tolist()))} has no direction",
                         "a non-zero axis vector")
    if joint.type in ("revolute", "prismatic"):
        limit = joint.limit
        if limit is None or limit.lower is None or limit.upper is None:
            checker.fail(element, where, f"the {joint.type} joint has no <limit lower=... upper=...>",
                         "both limits (the URDF format requires <limit> for revolute and prismatic joints)")
        lower, upper = float(limit.lower), float(limit.upper)
        if not lower < upper:
            checker.fail(element, where, f"<limit lower=\"{limit.lower}\" upper=\"{limit.upper}\"> leaves no motion",
                         "lower < upper")
    return ChainJoint(joint.name, joint.type, joint.parent, joint.child, origin, axis, lower, upper,
                      checker.lines.get(id(element)))


def read_chain(path: str | Path, root: str | None = None, tip: str | None = None) -> Chain:
    """The chain of ``path`` from ``root`` to ``tip`` (defaults: the tree's root and its only leaf)."""
    path = Path(path)
    shown = str(path)
    if path.suffix.lower() != ".urdf":
        raise ArmFileError(shown, "", f"unknown file type '{path.suffix or '(none)'}'", "a .urdf file")
    raw = read_urdf_bytes(path)
    xml_root, lines = safe_tree(raw, shown)
    checker = ElementChecker(shown, lines)
    checker.robot(xml_root)
    elements = {element.get("name"): element for element in xml_root.findall("joint")}
    model = library_model(raw, shown, xml_root)
    tree = LinkTree(model, elements, checker)
    root = tree.pick_root(root)
    tip = tree.pick_tip(root, tip)
    joints = tuple(chain_joint(j, elements[j.name], checker) for j in tree.joints_between(root, tip))
    if all(j.kind == "fixed" for j in joints):
        raise ArmFileError(shown, "", f"every joint from '{root}' to '{tip}' is fixed",
                           "at least one revolute, continuous or prismatic joint in the chain")
    return Chain(model.robot.name, root, tip, joints, hashlib.sha256(raw).hexdigest())
