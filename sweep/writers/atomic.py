"""Write a file under a temporary name in the same folder, then rename it into place."""
from __future__ import annotations

import os
from pathlib import Path

from ..errors import InputError


def write_text_atomic(path: Path, text: str) -> None:
    tmp = path.with_name(f".{path.name}.part-{os.getpid()}")
    try:
        tmp.write_text(text, encoding="utf-8")
        os.replace(tmp, path)
    except OSError as e:
        raise InputError(str(path), "", f"cannot write: {e.strerror}") from None
    finally:
        if tmp.exists():
            tmp.unlink()
