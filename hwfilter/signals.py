"""Test signals in integer input words, and file I/O for word sequences."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np

from .errors import FilterFileError
from .fixed import Format

__all__ = ["default_signal", "read_words", "write_words", "atomic_write_text"]

#: samples in the default test signal of ``hwfilter simulate``
DEFAULT_SAMPLES = 8192


def default_signal(fmt: Format, n: int = DEFAULT_SAMPLES, seed: int = 1) -> np.ndarray:
    """The documented default input: uniform random words at half full scale.

    Seeded (``numpy.random.default_rng(seed)``), so every run sees the same words: values
    uniform in ``[-2**(bits-2), 2**(bits-2)]``, a busy signal whose rounding errors are
    close to white (the condition under which noise predictions hold).
    """
    half = 1 << max(fmt.bits - 2, 0)
    return np.random.default_rng(seed).integers(-half, half + 1, size=n, dtype=np.int64)


def read_words(path, fmt: Format, what: str = "input") -> np.ndarray:
    """Read signed integer words: a text file, one per line, or a ``.npy`` array."""
    path = Path(path)
    if not path.exists():
        raise FilterFileError("file not found", source=str(path))
    if path.suffix == ".npy":
        try:
            arr = np.load(path, allow_pickle=False)
        except (ValueError, OSError) as e:
            raise FilterFileError(f"is not a readable .npy array: {e}", source=str(path)) from e
        if arr.ndim != 1 or not np.issubdtype(arr.dtype, np.integer):
            raise FilterFileError(
                f"must hold a 1-D integer array, not shape {arr.shape} dtype {arr.dtype}",
                source=str(path),
            )
        words = arr.astype(np.int64)
        where = lambda i: f"item {i}"  # noqa: E731
    else:
        words = []
        lines = []
        for lineno, line in enumerate(path.read_text().splitlines(), start=1):
            s = line.strip()
            if not s or s.startswith("#"):
                continue
            try:
                words.append(int(s))
            except ValueError:
                raise FilterFileError(
                    f"line {lineno}: must be a signed integer word, not {s!r}", source=str(path)
                ) from None
            lines.append(lineno)
        words = np.array(words, dtype=np.int64)
        where = lambda i: f"line {lines[i]}"  # noqa: E731
    if words.size == 0:
        raise FilterFileError(f"holds no {what} words", source=str(path))
    bad = np.nonzero((words < fmt.min_int) | (words > fmt.max_int))[0]
    if bad.size:
        i = int(bad[0])
        raise FilterFileError(
            f"{where(i)}: word {int(words[i])} does not fit the {what} format "
            f"({fmt.bits} bits: {fmt.min_int} .. {fmt.max_int})",
            source=str(path),
        )
    return words


def atomic_write_text(path, text: str):
    """Write a file so that it is either complete or absent (temp file, then rename)."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent or ".")
    try:
        with os.fdopen(fd, "w") as f:
            f.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_words(path, words):
    """Write integer words as text (one per line) or as ``.npy``, atomically."""
    path = Path(path)
    if not path.parent.exists():
        raise FilterFileError("folder does not exist", source=str(path.parent))
    if path.suffix == ".npy":
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".npy", dir=path.parent)
        os.close(fd)
        try:
            np.save(tmp, np.asarray(words, dtype=np.int64))
            os.replace(tmp, path)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
    else:
        atomic_write_text(path, "".join(f"{int(w)}\n" for w in words))
