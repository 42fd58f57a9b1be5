"""Write a file under a temporary name in the same folder, then rename it into place."""
from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from ..errors import InputError


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


@contextlib.contextmanager
def atomic_path(path: Path):
    """Yield a temporary path beside `path`; on success give it a normal file mode and rename it
    onto `path`; on any error remove it and leave `path` as it was."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    try:
        yield Path(tmp)
        os.chmod(tmp, 0o666 & ~_umask())   # mkstemp makes it private; outputs are for sharing
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text_atomic(path: Path, text: str) -> None:
    try:
        with atomic_path(path) as tmp:
            tmp.write_text(text, encoding="utf-8", newline="\n")
    except OSError as e:
        raise InputError(str(path), "", f"cannot write: {e.strerror}") from None
