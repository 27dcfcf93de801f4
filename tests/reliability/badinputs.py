"""How each entry of the bad-input corpus (``corpus/``) is set up and run through the command line.

Every entry gets a fresh folder; ``prepare`` sets it up and returns the command to run, so the
test can look at the folder before and after the command.
"""

from __future__ import annotations

import io
import shutil
import tarfile
from collections.abc import Callable
from contextlib import redirect_stderr, redirect_stdout
from dataclasses import dataclass
from pathlib import Path

CORPUS = Path(__file__).resolve().parent / "corpus"


@dataclass
class Prepared:
    folder: Path  # where the entry lives; it must be left as it was
    file: str  # the bad file, as the message must name it
    argv: list[str]  # the command line; argv[0] is "studyflow" or "studyflow-fv"

    def run(self) -> tuple[int, str]:
        """Run the command in this process; returns the exit code and what went to stderr."""
        if self.argv[0] == "studyflow-fv":
            from studyflow.fvsolver.cli import main as fv_main

            err, out = io.StringIO(), io.StringIO()
            with redirect_stderr(err), redirect_stdout(out):
                code = fv_main(self.argv[1:])
            return code, err.getvalue()
        code, err, _ = _cli(self.argv[1:])
        return code, err


def _cli(argv: list[str]) -> tuple[int, str, str]:
    from studyflow.cli import main

    err, out = io.StringIO(), io.StringIO()
    with redirect_stderr(err), redirect_stdout(out):
        try:
            code = main(argv)
        except SystemExit as exc:  # argparse
            code = int(exc.code or 0)
    return code, err.getvalue(), out.getvalue()


def base_study(root: Path, study_text: str | None = None) -> Path:
    root.mkdir(parents=True)
    shutil.copytree(CORPUS / "tpl", root / "tpl")
    (root / "study.yaml").write_bytes(study_text.encode() if study_text is not None
                                      else (CORPUS / "base.yaml").read_bytes())
    return root


def study_entry(name: str, tmp: Path) -> Prepared:
    root = tmp / "study"
    base_study(root)
    shutil.copyfile(CORPUS / "study" / name, root / "study.yaml")
    return Prepared(root, str(root / "study.yaml"), ["studyflow", "run", str(root), "--quiet"])


def template_entry(name: str, tmp: Path) -> Prepared:
    root = base_study(tmp / "study")
    shutil.copyfile(CORPUS / "template" / name, root / "tpl" / "case.txt")
    return Prepared(root, str((root / "tpl" / "case.txt").resolve()), ["studyflow", "run", str(root), "--quiet"])


def collect_entry(name: str, tmp: Path) -> Prepared:
    text = (CORPUS / "base.yaml").read_text()
    head = text[: text.index("quantities:")]
    root = base_study(tmp / "study", head + "quantities:\n" + (CORPUS / "collect" / name).read_text())
    return Prepared(root, str(root / "study.yaml"), ["studyflow", "run", str(root), "--quiet"])


def fv_entry(name: str, tmp: Path) -> Prepared:
    case = tmp / "case"
    case.mkdir()
    shutil.copyfile(CORPUS / "fv" / name, case / "case.toml")
    return Prepared(case, str(case / "case.toml"), ["studyflow-fv", str(case / "case.toml")])


def csv_entry(name: str, tmp: Path) -> Prepared:
    folder = tmp / "data"
    folder.mkdir()
    shutil.copyfile(CORPUS / "csv" / name, folder / name)
    return Prepared(folder, str(folder / name),
                    ["studyflow", "assess-csv", str(folder / name), "-o", str(folder / "uncertainty.csv")])


# --- archives: built here (a tar file is binary), each with one bad member ----------------------

def _add(tf: tarfile.TarFile, name: str, data: bytes = b"x", **attrs) -> None:
    info = tarfile.TarInfo(name)
    info.size = len(data) if attrs.get("type", tarfile.REGTYPE) == tarfile.REGTYPE else 0
    for k, v in attrs.items():
        setattr(info, k, v)
    tf.addfile(info, io.BytesIO(data) if info.size else None)


def _tar(path: Path, members: Callable[[tarfile.TarFile], None]) -> None:
    with tarfile.open(path, "w:gz") as tf:
        _add(tf, "bundle/manifest.json", b"{}")
        members(tf)


ARCHIVES: dict[str, tuple[Callable[[Path], None], str]] = {
    # name: (builder, the bad entry the message must name)
    "traversal": (lambda p: _tar(p, lambda tf: _add(tf, "bundle/../../evil.txt")), "bundle/../../evil.txt"),
    "absolute": (lambda p: _tar(p, lambda tf: _add(tf, "/tmp/evil.txt")), "/tmp/evil.txt"),
    "symlink-out": (lambda p: _tar(p, lambda tf: _add(tf, "bundle/out", type=tarfile.SYMTYPE,
                                                      linkname="../../../etc")), "bundle/out"),
    "symlink-absolute": (lambda p: _tar(p, lambda tf: _add(tf, "bundle/pw", type=tarfile.SYMTYPE,
                                                           linkname="/etc/passwd")), "bundle/pw"),
    "hard-link": (lambda p: _tar(p, lambda tf: _add(tf, "bundle/hard", type=tarfile.LNKTYPE,
                                                    linkname="bundle/manifest.json")), "bundle/hard"),
    "device": (lambda p: _tar(p, lambda tf: _add(tf, "bundle/null", type=tarfile.CHRTYPE, devmajor=1,
                                                 devminor=3)), "bundle/null"),
    "fifo": (lambda p: _tar(p, lambda tf: _add(tf, "bundle/pipe", type=tarfile.FIFOTYPE)), "bundle/pipe"),
    "through-link": (lambda p: _tar(p, lambda tf: (_add(tf, "bundle/d", type=tarfile.SYMTYPE, linkname="."),
                                                   _add(tf, "bundle/d/x.txt"))), "bundle/d/x.txt"),
    "duplicate": (lambda p: _tar(p, lambda tf: _add(tf, "bundle/manifest.json", b"[]")), "bundle/manifest.json"),
    "not-an-archive": (lambda p: p.write_bytes(b"this is not a tar file\n" * 20), ""),
    "truncated": (lambda p: (_tar(p, lambda tf: _add(tf, "bundle/big.bin", bytes(range(256)) * 400)),
                             p.write_bytes(p.read_bytes()[:300])), ""),
}


def archive_entry(name: str, tmp: Path) -> Prepared:
    folder = tmp / "inbox"
    folder.mkdir()
    archive = folder / f"{name}.tar.gz"
    ARCHIVES[name][0](archive)
    return Prepared(folder, str(archive), ["studyflow", "audit", str(archive), "--into", str(folder / "unpacked")])


KINDS: dict[str, tuple[Callable[[str, Path], Prepared], Callable[[], list[str]]]] = {
    "study": (study_entry, lambda: sorted(p.name for p in (CORPUS / "study").iterdir())),
    "template": (template_entry, lambda: sorted(p.name for p in (CORPUS / "template").iterdir())),
    "collect": (collect_entry, lambda: sorted(p.name for p in (CORPUS / "collect").iterdir())),
    "fv": (fv_entry, lambda: sorted(p.name for p in (CORPUS / "fv").iterdir() if not p.name.startswith("_"))),
    "csv": (csv_entry, lambda: sorted(p.name for p in (CORPUS / "csv").iterdir())),
    "archive": (archive_entry, lambda: sorted(ARCHIVES)),
}


def prepare(kind: str, name: str, tmp: Path) -> Prepared:
    return KINDS[kind][0](name, tmp)
