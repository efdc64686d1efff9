"""Small in-process memos of species-independent work within a catalogue build.

The radial integrals, the multiplet plan, the grid of states and the
charge-only level terms are the same for H, D and T (and the first three for
every species); each memo keeps the last few results so that the next species
of one build reuses them.  `clear_all` forgets everything: what a benchmark of
a truly cold build needs.
"""

__all__ = ["Memo", "clear_all"]

_ALL = []


class Memo:
    """A dictionary that keeps at most `size` entries, dropping the oldest first.
    Stored arrays should be read-only: every caller shares them."""

    def __init__(self, size):
        self.size = size
        self._data = {}
        _ALL.append(self)

    def get(self, key):
        return self._data.get(key)

    def put(self, key, value):
        if len(self._data) >= self.size:
            self._data.pop(next(iter(self._data)))
        self._data[key] = value
        return value

    def clear(self):
        self._data.clear()

    def __len__(self):
        return len(self._data)


def clear_all():
    """Forget every kept result of every memo."""
    for memo in _ALL:
        memo.clear()
