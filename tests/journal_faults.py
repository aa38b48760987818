"""Injected I/O failures for the journal (``etchguard._journal`` looks ``os`` up as a
module global, so a test swaps in ``FaultyOs`` with monkeypatch)."""

from __future__ import annotations

import errno
import os


class FaultyOs:
    """``os``, except that while ``failing`` is set, ``write`` (with ``writes``) and
    ``fsync`` (with ``fsyncs``) fail with ENOSPC; a failing write first writes
    ``partial`` bytes of its data, as a disk that fills up half-way through does."""

    def __init__(self, writes: bool = True, fsyncs: bool = False, partial: int = 0) -> None:
        self.failing = False
        self.writes, self.fsyncs, self.partial = writes, fsyncs, partial
        self.failures = 0

    def _fail(self):
        self.failures += 1
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    def write(self, fd, data):
        if not (self.failing and self.writes):
            return os.write(fd, data)
        if self.partial and len(data) > self.partial:
            os.write(fd, bytes(data[:self.partial]))
        self._fail()

    def fsync(self, fd):
        if self.failing and self.fsyncs:
            self._fail()
        return os.fsync(fd)

    def __getattr__(self, name):
        return getattr(os, name)
