"""From an arm to its generated files: derive once, render every back-end, write atomically.

``build(arm)`` returns {relative path: text} without touching the disk; ``write(outputs, dir)``
writes them all or nothing (each file goes to a temporary name first, then all are renamed);
``stale(outputs, dir)`` lists the files that differ from what is on disk (the ``--check`` mode).
"""

from __future__ import annotations

import importlib.util
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

from .backends import batch as batch_backend, c as c_backend, common, python as python_backend
from .backends import report as report_backend
from .errors import IkgenError
from .engine import derive as derive_arm
from .ir import Derivation
from .model import Arm
from .sidejobs import SideJob
from .stopwatch import Stopwatch


@dataclass
class Build:
    arm: Arm
    derivation: Derivation
    files: dict[str, str]           # path relative to the output folder -> text

    @property
    def folder(self) -> str:
        return common.identifier(self.arm.name)

    @property
    def python_path(self) -> str:
        return f"{self.folder}/{self.folder}_ik.py"


def build(arm: Arm, timings: dict | None = None) -> Build:
    """Derive once and render every file. ``timings`` (optional) receives each phase's seconds
    (derive, python, batch, c, selftest and the report's phases; see stopwatch.py).

    The report's figures and documents are made by two side jobs (sidejobs.py: forked helper
    processes where that is allowed, else here, with the same result): the figures' job starts
    before the derivation (matplotlib's import and the arm at its zero reading need only the arm),
    the documents' job as soon as the derivation is done (the equation sheet needs nothing else;
    the sample pose, the verification and the figures follow it by message); meanwhile this process renders the code and runs the report's verification."""
    watch = Stopwatch(timings)
    folder = common.identifier(arm.name)
    figures_job = SideJob(lambda receive, phases: figure_work(arm, receive, phases))
    try:
        with watch("derive"):
            derivation = derive_arm(arm)
        documents_job = SideJob(lambda receive, phases: document_work(arm, derivation, receive, phases))
        try:
            with watch("python"):
                python_source = python_backend.render(arm, derivation)
            solver = load_module(python_source, f"{folder}_ik_for_selftest")
            with watch("report: sample pose"):
                pose, panels, target = report_backend.sample_evidence(arm, derivation, solver)
            figures_job.send((panels, target))
            files = code_files(arm, derivation, python_source, solver, watch)
            with watch("report: verification"):
                verification = report_backend.verification_summary(arm, solver)
            with watch("report: waiting for helpers"):
                documents_job.send((pose, verification, figures_job.result(timings)))
                report = documents_job.result(timings)
        finally:
            documents_job.close()
    finally:
        figures_job.close()
    files.update({f"{folder}/{name}": text for name, text in report.items()})
    return Build(arm, derivation, files)


def build_code(arm: Arm) -> Build:
    """``build`` without the report: the solvers' files and the derivation's text only (the same
    bytes as build's), for callers that compile or load the code and never read the report."""
    derivation = derive_arm(arm)
    python_source = python_backend.render(arm, derivation)
    solver = load_module(python_source, f"{common.identifier(arm.name)}_ik_for_selftest")
    return Build(arm, derivation, code_files(arm, derivation, python_source, solver, Stopwatch(None)))


def code_files(arm: Arm, derivation: Derivation, python_source: str, solver, watch: Stopwatch) -> dict[str, str]:
    """The solvers' files and the derivation's text, paths relative to the output folder."""
    folder = common.identifier(arm.name)
    files = {f"{folder}/{folder}_ik.py": python_source}
    with watch("batch"):
        files[f"{folder}/{folder}_ik_batch.py"] = batch_backend.render(arm, derivation)
    files[f"{folder}/{folder}_derivation.txt"] = str(derivation) + "\n"
    with watch("selftest"):
        vectors = c_backend.selftest_vectors(arm, solver=solver)     # the same poses for both scalar types
    for scalar in c_backend.SCALARS:
        with watch("c"):
            for name, text in c_backend.render(arm, derivation, scalar).items():
                files[f"{folder}/{name}"] = text
        with watch("selftest"):
            name, text = c_backend.render_selftest(arm, derivation, scalar, solver=solver, vectors=vectors)
        files[f"{folder}/{name}"] = text
    return files


def figure_work(arm: Arm, receive, phases: dict) -> tuple[str, str]:
    """The report's two figures (a side job: the sample pose's panels arrive by ``receive``)."""
    return report_backend.figure_texts(arm, receive, phases)


def document_work(arm: Arm, derivation: Derivation, receive, phases: dict) -> dict[str, str]:
    """The report's files (a side job): the equation sheet first, then, with the sample pose's
    table, the verification summary and the figures from ``receive``, the HTML and Markdown
    documents."""
    watch = Stopwatch(phases)
    with watch("report: sheet"):
        data = report_backend.sheet_context(arm, derivation, common.identifier(arm.name))
    pose, verification, svgs = receive()
    data = report_backend.evidence_context(data, pose, verification, svgs)
    with watch("report: documents"):
        return report_backend.documents(data)


def report_files(arm: Arm, derivation: Derivation, python_source: str, timings: dict | None = None) -> dict[str, str]:
    """The derivation report (HTML, Markdown and its two SVG figures), paths relative to the
    output folder; the report verifies ``python_source`` (the generated solver) for its figures."""
    folder = common.identifier(arm.name)
    return {f"{folder}/{name}": text
            for name, text in report_backend.render(arm, derivation, python_source, timings=timings).items()}


def build_report(arm: Arm) -> Build:
    """Only the report files of an arm (``ikgen explain``)."""
    derivation = derive_arm(arm)
    return Build(arm, derivation, report_files(arm, derivation, python_backend.render(arm, derivation)))


def write(files: dict, out_dir: str | Path = ".") -> list[Path]:
    """Write every file or none: temporary files first, renamed into place only when all exist.

    ``files`` maps a path (relative to ``out_dir``) to text or bytes. A file that cannot be written
    raises IkgenError naming it, and nothing is left behind.
    """
    out_dir = Path(out_dir)
    staged: list[tuple[Path, Path]] = []
    target = out_dir
    try:
        for relative, data in sorted(files.items(), key=lambda item: str(item[0])):
            target = out_dir / relative
            target.parent.mkdir(parents=True, exist_ok=True)
            handle, temporary = tempfile.mkstemp(prefix=".ikgen-", dir=target.parent)
            os.chmod(temporary, 0o666 & ~_umask())   # mkstemp makes 0600; give the usual file mode
            if isinstance(data, bytes):
                with os.fdopen(handle, "wb") as stream:
                    stream.write(data)
            else:
                with os.fdopen(handle, "w", encoding="utf-8", newline="\n") as stream:
                    stream.write(data)
            staged.append((Path(temporary), target))
    except OSError as exc:
        for temporary, _ in staged:
            temporary.unlink(missing_ok=True)
        raise IkgenError(f"cannot write {target}: {exc.strerror or exc}; expected a writable output path") from None
    except BaseException:
        for temporary, _ in staged:
            temporary.unlink(missing_ok=True)
        raise
    for temporary, target in staged:
        os.replace(temporary, target)
    return [target for _, target in staged]


def _umask() -> int:
    current = os.umask(0)
    os.umask(current)
    return current


def stale(files: dict[str, str], out_dir: str | Path) -> list[str]:
    out_dir = Path(out_dir)
    changed = []
    for relative, text in sorted(files.items()):
        path = out_dir / relative
        if not path.is_file() or path.read_text(encoding="utf-8") != text:
            changed.append(relative)
    return changed


def load_module(source: str, name: str):
    """Import generated Python source as a module without writing it anywhere."""
    spec = importlib.util.spec_from_loader(name, loader=None)
    module = importlib.util.module_from_spec(spec)
    exec(compile(source, f"<generated {name}>", "exec"), module.__dict__)
    return module
