"""Files at the edge: reading inputs with a bound, and writing outputs safely.

Reading (:func:`read_bytes`): regular files only (a FIFO, a device such as /dev/zero, a
folder are refused without blocking), at most :data:`MAX_INPUT_BYTES`.

Writing (:class:`OutputPlan`): every file one command will write is named first, and
all of them are checked before any computation (names built from a sanitised stem,
:func:`safe_stem`, that resolve inside the folder the user named; no clash with an
existing file unless ``force``; no file written twice; the folder creatable and
writable, probed with a temporary file that is removed at once), so a refusal writes
nothing. Each file is then written atomically (:func:`write_atomic`: a temporary file
beside it, renamed into place, never over an existing file without ``force``),
created with the user's umask, and the temporary file is removed on every exit a
process can handle: exceptions, Ctrl-C and SIGTERM (:func:`exit_on_signals`).
Every file-system failure is one :class:`~partpick.errors.InputError` naming the path
and the cause.
"""

from __future__ import annotations

import atexit
import errno
import os
import re
import signal
import stat
import sys
import tempfile
import unicodedata
from pathlib import Path

from partpick.errors import InputError

__all__ = ["MAX_INPUT_BYTES", "read_bytes", "write_atomic", "safe_stem", "OutputPlan", "exit_on_signals",
           "as_program", "leave", "os_cause"]

MAX_INPUT_BYTES = 2 * 1024 * 1024   # the largest spec, catalog, BOM or stock file read, bytes
_NAME_MAX = 255                     # bytes in one file name (Linux, macOS, NTFS in UTF-16 units)
_STEM_MAX = 64                      # characters kept of a spec name used as a file stem
_SPECIAL = ((stat.S_ISFIFO, "a FIFO (named pipe)"), (stat.S_ISCHR, "a character device"),
            (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"), (stat.S_ISDIR, "a directory"))
_RESERVED = {"CON", "PRN", "AUX", "NUL", *(f"COM{i}" for i in range(1, 10)), *(f"LPT{i}" for i in range(1, 10))}
_LIVE_TEMPS: set[str] = set()       # temporary files being written, removed at exit whatever happens


def os_cause(exc: OSError) -> str:
    """The reason of an OS error in words ('Permission denied', 'Read-only file system')."""
    if exc.errno == errno.ENAMETOOLONG:
        return f"a name is longer than the {_NAME_MAX} bytes the file system allows"
    return exc.strerror or exc.__class__.__name__


def _kind(mode: int) -> str | None:
    for test, word in _SPECIAL:
        if test(mode):
            return word
    return None if stat.S_ISREG(mode) else "not a regular file"


def _checked_name(path: str | Path, error_cls: type[InputError]) -> str:
    text = os.fspath(path)
    if "\0" in text:
        raise error_cls("the path holds a NUL character", source=text)
    if not text:
        raise error_cls("the path is empty", source="''")
    return text


def read_bytes(path: str | Path, error_cls: type[InputError] = InputError, *,
               limit: int = MAX_INPUT_BYTES) -> bytes:
    """The bytes of the regular file at ``path``, at most ``limit`` of them.

    Opened without blocking and checked with fstat before reading, so a FIFO or a
    device is refused at once; anything else that goes wrong is ``error_cls`` naming
    the path and the cause.
    """
    source = _checked_name(path, error_cls)
    try:
        fd = os.open(source, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    except FileNotFoundError:
        raise error_cls("file not found", source=source) from None
    except IsADirectoryError:
        raise error_cls("is a directory, expected a file", source=source) from None
    except OSError as exc:
        raise error_cls(f"cannot read file ({os_cause(exc)})", source=source) from None
    try:
        kind = _kind(os.fstat(fd).st_mode)
        if kind is not None:
            raise error_cls(f"is {kind}, expected a regular file", source=source)
        chunks, size = [], 0
        while size <= limit:
            chunk = os.read(fd, min(1 << 20, limit + 1 - size))
            if not chunk:
                break
            chunks.append(chunk)
            size += len(chunk)
    except OSError as exc:
        raise error_cls(f"cannot read file ({os_cause(exc)})", source=source) from None
    finally:
        os.close(fd)
    if size > limit:
        raise error_cls(f"is larger than {limit // (1024 * 1024)} MiB; partpick reads input files up to that size",
                        source=source)
    return b"".join(chunks)


def safe_stem(name: str, fallback: str | Path = "spec") -> str:
    """``name`` reduced to a safe file stem: letters, digits, '-', '_' and '.' (other runs
    become one '-'), no leading or trailing dot or dash, at most 64 characters, not a
    name Windows reserves. When nothing is left, the stem of ``fallback`` (the spec
    file), reduced the same way, else 'spec'."""
    for text in (name, Path(os.fspath(fallback)).stem, "spec"):
        text = unicodedata.normalize("NFC", str(text))
        out = "".join(c if (c.isalnum() or c in "._-") and c.isprintable() else "-" for c in text)
        out = re.sub(r"-{2,}", "-", out).strip(".- ")[:_STEM_MAX].rstrip(".- ")
        if out:
            return f"{out}-spec" if out.split(".")[0].upper() in _RESERVED else out
    return "spec"  # pragma: no cover - the last candidate is never empty


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def write_atomic(path: str | Path, data: str | bytes, *, force: bool = False) -> Path:
    """Write ``data`` (text as UTF-8) to ``path`` via a temporary file in the same folder
    and a rename, so no reader ever sees half a file. Without ``force`` an existing file
    is refused, also one that appears while writing (the rename is a hard link, which
    never replaces). The file gets mode 0666 less the umask, as ``open`` would give."""
    path = Path(_checked_name(path, InputError))
    source = str(path)
    folder = path.parent
    try:
        if not force and os.path.lexists(path):
            raise InputError("already exists; pass --force to overwrite it", source=source)
        if path.is_dir():
            raise InputError("is a directory, expected a file name", source=source)
        folder.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name[:_NAME_MAX - 24]}.", suffix=".tmp", dir=folder)
    except FileExistsError:
        raise InputError(f"cannot create folder {folder}: a file of that name is in the way", source=source) from None
    except NotADirectoryError:
        raise InputError(f"cannot create folder {folder}: part of the path is a file", source=source) from None
    except OSError as exc:
        raise InputError(f"cannot write file ({os_cause(exc)})", source=source) from None
    _LIVE_TEMPS.add(tmp)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data.encode("utf-8") if isinstance(data, str) else data)
            os.fchmod(fh.fileno(), 0o666 & ~_umask())
        if force:
            os.replace(tmp, path)
        else:
            _link_new(tmp, path)
    except FileExistsError:
        raise InputError("already exists (it appeared while partpick ran); pass --force to overwrite it",
                         source=source) from None
    except OSError as exc:
        raise InputError(f"cannot write file ({os_cause(exc)})", source=source) from None
    finally:
        Path(tmp).unlink(missing_ok=True)
        _LIVE_TEMPS.discard(tmp)
    return path


def _link_new(tmp: str, path: Path) -> None:
    """Put ``tmp`` in place at ``path`` only if nothing is there (a hard link never
    replaces); on a file system without hard links, check and rename."""
    try:
        os.link(tmp, path)
    except OSError as exc:
        if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EXDEV, errno.EMLINK):
            raise
        if os.path.lexists(path):
            raise FileExistsError(errno.EEXIST, "File exists") from None
        os.replace(tmp, path)


@atexit.register
def _remove_live_temps() -> None:
    for tmp in list(_LIVE_TEMPS):
        Path(tmp).unlink(missing_ok=True)


def _raise_exit(signum, frame) -> None:
    raise SystemExit(128 + signum)


def as_program(run, program: bool):
    """run() (a command line's whole run); as the program (``program``), its end, normal
    or by SystemExit, is leave()'s."""
    if not program:
        return run()
    try:
        run()
    except SystemExit as exc:
        leave(exc.code)
    leave(0)


def leave(code) -> None:
    """End the program with ``code`` (as SystemExit takes it: None is 0, a message is
    printed and is 1) once its command has ended: the output flushed and the exit
    handlers run (a write's temporary file removed), then out without the interpreter's
    teardown of every module and table, which nothing partpick holds needs (its files
    are written and closed, its helper processes gone): about 45 ms of a design run
    (paired runs, 2026-12-05)."""
    if isinstance(code, str):
        print(code, file=sys.stderr)
        code = 1
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):   # (a reader gone, a closed stream: nothing more to say)
            pass
    atexit._run_exitfuncs()
    os._exit(code if isinstance(code, int) else 0)


def exit_on_signals() -> None:
    """Turn SIGTERM and SIGHUP into ``SystemExit`` (exit code 128 + signal), so cleanup
    (temporary files) runs as it does for Ctrl-C. Call from the main thread."""
    for name in ("SIGTERM", "SIGHUP"):
        sig = getattr(signal, name, None)
        try:
            if sig is not None and signal.getsignal(sig) in (signal.SIG_DFL, None):
                signal.signal(sig, _raise_exit)
        except ValueError:  # not the main thread: leave the signals alone
            return


class OutputPlan:
    """The files one command will write, checked together before any computation.

    Add each with :meth:`file` (a path the user named) or :meth:`in_folder` (a name
    partpick builds inside a folder the user named), then :meth:`check`; write each with
    :meth:`write` (or :func:`write_atomic` and :meth:`done`). When a write fails, the
    files this plan already created are removed again (:meth:`rollback`).
    """

    def __init__(self, *, force: bool = False) -> None:
        self.force = force
        self.targets: dict[Path, str] = {}   # resolved path -> option that asked for it
        self.paths: dict[Path, Path] = {}    # resolved path -> the path as named
        self.created: list[Path] = []

    def file(self, path: str | Path, option: str) -> Path:
        """A file the user named (``report -o page.html``)."""
        path = Path(_checked_name(path, InputError))
        return self._add(path, option)

    def in_folder(self, folder: str | Path, name: str, option: str) -> Path:
        """``name`` (built by partpick, e.g. from :func:`safe_stem`) inside the folder the
        user named; refused when it would resolve anywhere else."""
        folder = Path(_checked_name(folder, InputError))
        path = folder / name
        if Path(name).name != name or name in (".", ".."):
            raise InputError(f"the file name '{name}' would leave {folder}", source=str(path))
        try:
            inside = _resolve(path).parent == _resolve(folder)
        except OSError as exc:
            raise InputError(f"cannot use this path ({os_cause(exc)})", source=str(path)) from None
        if not inside:
            raise InputError(f"resolves outside {folder} (a link?); refusing to write there", source=str(path))
        return self._add(path, option)

    def _add(self, path: Path, option: str) -> Path:
        try:
            key = _resolve(path)
        except OSError as exc:
            raise InputError(f"cannot use this path ({os_cause(exc)})", source=str(path)) from None
        if key in self.targets:
            raise InputError(f"would be written twice ({self.targets[key]} and {option})", source=str(path))
        self.targets[key] = option
        self.paths[key] = path
        return path

    def check(self) -> None:
        """Refuse, before anything is written: a name too long, an existing file (unless
        ``force``), a folder or special file where the file goes, a file where a folder
        must be, a folder that cannot be created or written to."""
        probed: set[Path] = set()
        for key, option in self.targets.items():
            path = self.paths[key]
            fail = _failer(path, option)
            if any(len(os.fsencode(part)) > _NAME_MAX for part in path.parts):
                raise fail(f"a name is longer than the {_NAME_MAX} bytes the file system allows")
            try:
                st = os.lstat(path)
            except FileNotFoundError:
                st = None
            except NotADirectoryError:
                raise fail("part of the path is a file, expected a folder") from None
            except OSError as exc:
                raise fail(f"cannot use this path ({os_cause(exc)})") from None
            if st is not None:
                if stat.S_ISDIR(st.st_mode):
                    raise fail("is a directory, expected a file name")
                kind = _kind(st.st_mode) if not stat.S_ISLNK(st.st_mode) else None
                if kind is not None:
                    raise fail(f"is {kind}; partpick writes regular files only")
                if not self.force:
                    raise fail("already exists; pass --force to overwrite it")
            folder = _existing_folder(path.parent, fail)
            if folder not in probed:
                _probe(folder, fail)
                probed.add(folder)

    def write(self, path: Path, data: str | bytes) -> Path:
        """Write one planned file atomically."""
        return self.done(write_atomic(path, data, force=self.force))

    def done(self, path: Path) -> Path:
        """Note a planned file as written (for :meth:`rollback`)."""
        self.created.append(Path(path))
        return Path(path)

    def rollback(self) -> None:
        """Remove the files this plan created, when they were new (never one it replaced)."""
        if not self.force:
            for path in self.created:
                Path(path).unlink(missing_ok=True)
        self.created.clear()


def _resolve(path: Path) -> Path:
    return Path(os.path.realpath(path))


def _failer(path: Path, option: str):
    def fail(message: str) -> InputError:
        return InputError(message, source=str(path))
    return fail


def _existing_folder(folder: Path, fail) -> Path:
    """The nearest folder that exists on the way to ``folder`` (which partpick would
    create); refused when a file stands where a folder must be."""
    probe = folder if str(folder) else Path(".")
    while True:
        try:
            st = os.stat(probe)
        except FileNotFoundError:
            parent = probe.parent
            if parent == probe:
                raise fail(f"cannot create folder {folder}") from None
            probe = parent
            continue
        except NotADirectoryError:
            raise fail(f"cannot create folder {folder}: part of the path is a file") from None
        except OSError as exc:
            raise fail(f"cannot use folder {probe} ({os_cause(exc)})") from None
        if not stat.S_ISDIR(st.st_mode):
            raise fail(f"cannot create folder {folder}: {probe} is a file")
        return probe


def _probe(folder: Path, fail) -> None:
    """Create and remove a temporary file in ``folder``: the one sure test that it can be
    written to (permissions, a read-only file system, quotas)."""
    try:
        fd, tmp = tempfile.mkstemp(prefix=".partpick-probe.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise fail(f"cannot write in folder {folder} ({os_cause(exc)})") from None
    os.close(fd)
    os.unlink(tmp)
