"""Atomic file writing, and result folders that always hold one consistent set.

Single files
    :func:`atomic_path` writes beside the target under a temporary name and
    renames it over the target.  The temporary name carries the writer's
    process id and a ``.cablefe-tmp`` tag so that temporaries left by a
    killed run are recognised and removed by later runs
    (:func:`clean_stale_temporaries`).  Files are created with mode
    ``0o666`` filtered by the user's umask, as any ordinary file.

Result folders (:class:`ResultFolder`)
    A run writes its whole set of files into a hidden staging folder inside
    the output folder (``OUT/.cablefe-staging-<pid>-<random>/``) and, when
    every file is complete, moves them into place one rename each (signals
    held back meanwhile).  The manifest ``OUT/.cablefe-manifest.json`` lists
    the files cablefe wrote there; files of the previous set that are not in
    the new one are removed, so new results never stand beside old meshes.
    Files cablefe did not write are never touched.  Staging folders and
    temporaries of killed runs are removed when the folder is next written.
"""
from __future__ import annotations

import contextlib
import json
import os
import re
import secrets
import shutil
import signal
import stat
import threading
from pathlib import Path

from ..errors import CaseError

TMP_TAG = ".cablefe-tmp"
STAGING_PREFIX = ".cablefe-staging-"
MANIFEST = ".cablefe-manifest.json"

_TMP_RE = re.compile(r"^\..+\.(\d+)-[0-9a-f]{8}" + re.escape(TMP_TAG) + r"(\..*)?$")
_STAGING_RE = re.compile("^" + re.escape(STAGING_PREFIX) + r"(\d+)-[0-9a-f]{8}$")
# temporaries of earlier versions (tempfile.mkstemp: ".<name>.<8 chars><suffix>"),
# removed only when <name> is a file cablefe wrote into the folder
_OLD_TMP_RE = re.compile(r"^\.(?P<name>.+)\.[a-z0-9_]{8}(?P<suffix>\.[^.]+)?$")


class OutputError(CaseError):
    """An output path that cannot be written: the CLI prints one line, exit 2.

    The message names the path (as ``file``) and what is wrong with it.
    """

    def __init__(self, path, message: str):
        super().__init__("", message, str(path))

    def with_file(self, file: str) -> "OutputError":
        return self


def _create_new(path: Path) -> None:
    """Create an empty file that did not exist, mode 0o666 less the umask."""
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    os.close(fd)


def _temporary(path: Path, suffix: str) -> Path:
    for _ in range(100):
        tmp = path.parent / f".{path.name}.{os.getpid()}-{secrets.token_hex(4)}{TMP_TAG}{suffix}"
        try:
            _create_new(tmp)
        except FileExistsError:
            continue
        return tmp
    raise FileExistsError(f"no free temporary name beside {path}")


@contextlib.contextmanager
def atomic_path(path, suffix: str | None = None):
    """Yield a temporary path in the target's folder; rename it on success.

    An exception (or an interrupt) leaves no file under the final name and
    removes the temporary; a killed process leaves the temporary, which
    :func:`clean_stale_temporaries` recognises by its tag and process id.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = _temporary(path, path.suffix if suffix is None else suffix)
    try:
        yield tmp
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text(path, text: str) -> None:
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8")


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OSError):
        return True
    return True


def clean_stale_temporaries(folder, known_names=()) -> list[Path]:
    """Remove temporaries and staging folders left in ``folder`` by killed runs.

    Parameters
    ----------
    folder : path of the folder
    known_names : names of files cablefe wrote there; temporaries of earlier
        versions beside them (``.<name>.<8 chars><suffix>``) are removed too

    Returns
    -------
    list of Path removed
    """
    folder = Path(folder)
    known = set(known_names)
    removed = []
    try:
        entries = list(os.scandir(folder))
    except FileNotFoundError:
        return removed
    for entry in entries:
        name = entry.name
        if not name.startswith("."):
            continue
        m = _TMP_RE.match(name)
        if m and entry.is_file(follow_symlinks=False) and not _alive(int(m.group(1))):
            with contextlib.suppress(FileNotFoundError):
                os.unlink(entry.path)
                removed.append(Path(entry.path))
            continue
        m = _STAGING_RE.match(name)
        if m and entry.is_dir(follow_symlinks=False) and not _alive(int(m.group(1))):
            shutil.rmtree(entry.path, ignore_errors=True)
            removed.append(Path(entry.path))
            continue
        m = _OLD_TMP_RE.match(name)
        if (m and m.group("name") in known and entry.is_file(follow_symlinks=False)
                and (m.group("suffix") or "") == Path(m.group("name")).suffix):
            with contextlib.suppress(FileNotFoundError):
                os.unlink(entry.path)
                removed.append(Path(entry.path))
    return removed


# ---------------------------------------------------------------------------
# checking output paths before any work
# ---------------------------------------------------------------------------

def _writable_folder(path: Path) -> bool:
    # a folder whose write bits are all off was marked read-only by its
    # owner: respected even where the permissions would let us in (root)
    try:
        mode = path.stat().st_mode
    except OSError:
        return False
    return os.access(path, os.W_OK | os.X_OK) and bool(mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))


def _check_creatable(path: Path, what: str) -> None:
    """``path`` does not exist: its nearest existing ancestor must be a writable folder."""
    parent = path.parent
    while not parent.exists() and parent != parent.parent:
        if parent.is_symlink():   # a dangling link
            raise OutputError(path, f"{what} cannot be made: {parent} is a broken link")
        parent = parent.parent
    if not parent.is_dir():
        raise OutputError(path, f"{what} cannot be made: {parent} is a file, not a folder")
    if not _writable_folder(parent):
        raise OutputError(path, f"{what} cannot be made: the folder {parent} is not writable")


def check_output_folder(folder) -> Path:
    """Check, before any work, that ``folder`` can hold a result set.

    Raises
    ------
    OutputError
        An existing file, a read-only folder, a folder under a file or
        under an unwritable parent.
    """
    folder = Path(folder)
    if folder.exists():
        if not folder.is_dir():
            raise OutputError(folder, "the output folder is an existing file, not a folder")
        if not _writable_folder(folder):
            raise OutputError(folder, "the output folder is not writable (read-only)")
        return folder
    if folder.is_symlink():
        raise OutputError(folder, "the output folder is a broken link")
    _check_creatable(folder, "the output folder")
    return folder


def check_output_file(path, what: str = "the output file") -> Path:
    """Check, before any work, that the file ``path`` can be written (created or replaced).

    Raises
    ------
    OutputError
        ``path`` is a folder, or its folder cannot be made or written.
    """
    path = Path(path)
    if path.is_dir():
        raise OutputError(path, f"{what} is an existing folder")
    if path.parent.exists():
        if not path.parent.is_dir():
            raise OutputError(path, f"{what} cannot be made: {path.parent} is a file, not a folder")
        if not _writable_folder(path.parent):
            raise OutputError(path, f"{what} cannot be written: the folder {path.parent} is not writable")
    else:
        _check_creatable(path.parent, f"the folder of {what}")
    return path


# ---------------------------------------------------------------------------
# result folders
# ---------------------------------------------------------------------------

@contextlib.contextmanager
def held_signals():
    """Hold SIGINT and SIGTERM back for the duration; re-raise as KeyboardInterrupt after.

    Used around the few renames that put a result set in place, so that an
    interrupt cannot leave half of a new set beside half of the old.  Only
    in the main thread (elsewhere signals are not delivered to Python code).
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught = []

    def hold(signum, frame):
        caught.append(signum)

    old = {s: signal.signal(s, hold) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        yield
    finally:
        for s, h in old.items():
            signal.signal(s, h)
    if caught:
        raise KeyboardInterrupt


def _read_manifest(folder: Path) -> list[str]:
    """Files of the folder written by cablefe: the manifest's, else the results a pvd lists."""
    try:
        data = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
        return [n for n in data.get("files", []) if _plain_name(n)]
    except (OSError, ValueError, AttributeError):
        pass
    # a folder written before manifests: results.json, results.pvd and the meshes it lists
    pvd = folder / "results.pvd"
    if not pvd.is_file():
        return []
    names = ["results.pvd"] + (["results.json"] if (folder / "results.json").is_file() else [])
    try:
        text = pvd.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return names
    names += [n for n in re.findall(r'file="([^"]+)"', text) if _plain_name(n) and n.endswith(".vtu")]
    return names


def _plain_name(name) -> bool:
    return (isinstance(name, str) and name not in ("", ".", "..") and "/" not in name and "\\" not in name
            and name != MANIFEST)


class ResultFolder:
    """An output folder written as one consistent set of files.

    Use as a context manager: files are written into :attr:`staging`; on a
    normal exit :meth:`commit` puts them in place (if not called already);
    on an exception the staging folder is removed and the folder keeps its
    previous set.

    Parameters
    ----------
    folder : path of the output folder (created if missing)
    keep_others : the files of the previous set that this one does not
        write stay in place and in the manifest (a command that adds to a
        folder, such as ``cablefe modes`` beside the results of ``run``);
        by default the new set replaces the previous one as a whole
    """

    # written last: a reader that sees the new results.json sees the new meshes
    LAST = ("results.pvd", "results.json")

    def __init__(self, folder, keep_others: bool = False):
        self.folder = Path(folder)
        self.keep_others = keep_others
        self.staging: Path | None = None
        self.committed: list[Path] = []

    def check(self) -> "ResultFolder":
        check_output_folder(self.folder)
        return self

    def open(self) -> Path:
        """Make the folder and a fresh staging folder in it; clean what killed runs left."""
        self.check()
        # folders made here are removed again when nothing is committed:
        # a run that fails on its input leaves no trace
        self._made = []
        p = self.folder
        while not p.exists() and p != p.parent:
            self._made.append(p)
            p = p.parent
        self.folder.mkdir(parents=True, exist_ok=True)
        clean_stale_temporaries(self.folder, _read_manifest(self.folder))
        for _ in range(100):
            path = self.folder / f"{STAGING_PREFIX}{os.getpid()}-{secrets.token_hex(4)}"
            try:
                path.mkdir()
            except FileExistsError:
                continue
            self.staging = path
            return path
        raise FileExistsError(f"no free staging name in {self.folder}")

    def final(self, path) -> Path:
        """The final path of a file written into the staging folder (also in a subfolder of it)."""
        path = Path(path)
        if self.staging is not None:
            try:
                return self.folder / path.relative_to(self.staging)
            except ValueError:
                pass
        return self.folder / path.name

    def commit(self) -> list[Path]:
        """Move the staged files into place and remove the previous set's other files.

        Returns
        -------
        list of Path, the files of the new set (final names).
        """
        if self.staging is None:
            raise RuntimeError("ResultFolder.commit before open")
        # plain files (a nested writer's manifest and temporaries stay behind), then folders
        files = sorted((p for p in self.staging.iterdir() if p.is_file() and not p.is_symlink()
                        and p.name != MANIFEST and not _TMP_RE.match(p.name)),
                       key=lambda p: (p.name in self.LAST, self.LAST.index(p.name) if p.name in self.LAST else 0,
                                      p.name))
        # folders of the set (``studies/``): each replaces its namesake as a whole
        folders = sorted(p for p in self.staging.iterdir() if p.is_dir() and not p.is_symlink()
                         and not _STAGING_RE.match(p.name) and _plain_name(p.name))
        new = [p.name for p in files] + [p.name for p in folders]
        old = _read_manifest(self.folder)
        with held_signals():
            # the manifest names old and new files while they are swapped,
            # so that a crash in between still leaves only known files
            write_text(self.folder / MANIFEST, json.dumps(
                {"writer": "cablefe", "state": "replacing", "files": sorted(set(old) | set(new))}, indent=1))
            for p in folders:
                target = self.folder / p.name
                if target.is_dir() and not target.is_symlink():
                    if p.name in old:    # the previous set's: replaced
                        aside = self.folder / f"{STAGING_PREFIX}{os.getpid()}-{secrets.token_hex(4)}"
                        os.replace(target, aside)
                        shutil.rmtree(aside, ignore_errors=True)
                    else:                # not known to be cablefe's: kept under another name
                        os.replace(target, self.folder / f"{p.name}.before-{secrets.token_hex(3)}")
                elif target.exists() or target.is_symlink():
                    os.replace(target, self.folder / f"{p.name}.before-{secrets.token_hex(3)}")
                os.replace(p, target)
            for p in files:
                os.replace(p, self.folder / p.name)
            for name in (set() if self.keep_others else set(old) - set(new)):
                target = self.folder / name
                if target.is_file() and not target.is_symlink():
                    with contextlib.suppress(FileNotFoundError):
                        target.unlink()
                elif target.is_dir() and not target.is_symlink():
                    shutil.rmtree(target, ignore_errors=True)
            listed = sorted(set(old) | set(new)) if self.keep_others else new
            write_text(self.folder / MANIFEST, json.dumps(
                {"writer": "cablefe", "state": "complete", "files": listed}, indent=1))
        self.committed = [self.folder / n for n in sorted(new, key=lambda n: n != "results.json")]
        self.discard()
        return self.committed

    def discard(self) -> None:
        """Remove the staging folder and whatever is still in it.

        Before a commit, also the output folder (and its parents) when this
        run made them and they are still empty.
        """
        if self.staging is not None:
            shutil.rmtree(self.staging, ignore_errors=True)
            self.staging = None
            if not self.committed:
                for made in getattr(self, "_made", []):   # deepest first
                    try:
                        made.rmdir()
                    except OSError:
                        break
        self._made = []

    def __enter__(self) -> "ResultFolder":
        self.open()
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None and self.staging is not None:
            self.commit()
        self.discard()
