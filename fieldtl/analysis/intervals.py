"""Per-interval sums of squares (or maxima) of several channels, for level histories."""

from __future__ import annotations

import numpy as np


class IntervalTable:
    """Per-interval sum of squares and sample count ("sum"), or maximum ("max"), of several
    channels; grows by one row per history interval of ``interval_frames`` input frames."""

    def __init__(self, channels: int, interval_frames: int, kind: str) -> None:
        self._interval_frames = interval_frames
        self._kind = kind
        fill = 0.0 if kind == "sum" else -np.inf
        self._fill = fill
        self._values = np.full((16, channels), fill)
        self._counts = np.zeros((16, channels), dtype=np.int64)
        self._rows = 0

    def add(self, channel: int, samples: np.ndarray, *, first_index: int, step: int, valid_from: int) -> None:
        """Add samples whose first one has index ``first_index`` at a rate of one per ``step``
        input frames; samples with an index below ``valid_from`` are skipped."""
        skip = max(0, valid_from - first_index)
        if skip >= samples.size:
            return
        samples = samples[skip:]
        first_index += skip
        first_row = first_index * step // self._interval_frames
        last_row = (first_index + samples.size - 1) * step // self._interval_frames
        self._grow(last_row + 1)
        # sample j belongs to row floor(j * step / interval_frames); row m starts at ceil(m F / step)
        cuts = [-(-row * self._interval_frames // step) - first_index for row in range(first_row + 1, last_row + 1)]
        bounds = [0, *cuts, samples.size]
        for row, (start, stop) in enumerate(zip(bounds, bounds[1:]), start=first_row):
            piece = samples[start:stop]
            if piece.size == 0:
                continue
            if self._kind == "sum":
                self._values[row, channel] += np.einsum("i,i->", piece, piece)   # sum of squares
                self._counts[row, channel] += piece.size
            else:
                self._values[row, channel] = max(self._values[row, channel], piece.max())

    def _grow(self, rows: int) -> None:
        if rows > self._values.shape[0]:
            capacity = max(rows, 2 * self._values.shape[0])
            extra = capacity - self._values.shape[0]
            self._values = np.vstack([self._values, np.full((extra, self._values.shape[1]), self._fill)])
            self._counts = np.vstack([self._counts, np.zeros((extra, self._counts.shape[1]), dtype=np.int64)])
        self._rows = max(self._rows, rows)

    def rows(self) -> np.ndarray:
        return self._values[: self._rows]

    def row_counts(self) -> np.ndarray:
        return self._counts[: self._rows]

    def totals(self) -> tuple[np.ndarray, np.ndarray]:
        return self.rows().sum(axis=0), self.row_counts().sum(axis=0)
