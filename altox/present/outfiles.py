"""Safe file writing for every output a command writes (reports, charts, repaired plans): checks before writing and atomic replacement."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from altox.errors import AltoxError


# -- writing files ------------------------------------------------------------------------------
def check_output(path, *, option: str, suffixes, force: bool = False, inputs=()) -> Path:
    """Check that ``path`` may be written as an output of ``option``; return it as a Path.

    Refused (AltoxError, one line naming the file): a suffix not in ``suffixes``; a folder that
    does not exist; a directory; any of the ``inputs`` (the plan files, also through a link);
    an existing file unless ``force``.
    """
    out = Path(path)
    if out.suffix.lower() not in suffixes:
        raise AltoxError(f"{option}: {str(out)!r} must end in {' or '.join(suffixes)}", field=option,
                         value=str(out), expected=" or ".join(suffixes))
    parent = out.parent if str(out.parent) else Path(".")
    if not parent.is_dir():
        raise AltoxError(f"{option}: {str(out)!r}: the folder {str(parent)!r} does not exist", field=option,
                         value=str(out))
    if out.is_dir():
        raise AltoxError(f"{option}: {str(out)!r} is a folder; expected a file name", field=option,
                         value=str(out))
    for src in inputs:
        if _same_file(out, Path(src)):
            raise AltoxError(f"{option}: {str(out)!r} is the input plan {str(src)!r}; refusing to write over it",
                             field=option, value=str(out))
    if (out.exists() or out.is_symlink()) and not force:
        raise AltoxError(f"{option}: {str(out)!r} already exists; use --force to replace it", field=option,
                         value=str(out))
    return out


def _same_file(a: Path, b: Path) -> bool:
    try:
        if a.exists() and b.exists():
            return os.path.samefile(a, b)
    except OSError:
        pass
    return os.path.realpath(a) == os.path.realpath(b)


def write_atomic(path, data: bytes) -> Path:
    """Write ``data`` to a temporary file beside ``path`` and move it into place (``os.replace``).

    Readers never see a half-written file; on any error the temporary file is removed and an
    existing ``path`` is left as it was.  The new file gets the usual permissions (0666 less the
    umask), not the private ones of a temporary file.  A symbolic link at ``path`` is replaced by
    the file, never followed.
    """
    out = Path(path)
    parent = out.parent if str(out.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{out.name}.", suffix=".tmp", dir=parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, out)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return out
