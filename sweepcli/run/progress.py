"""Progress of a sweep: a tqdm bar on a terminal, timestamped log lines otherwise.

tqdm writing to a batch log puts every update on one long line, so when stderr is not a
terminal (or with ``--no-progress``) a timer prints a line with the same figures (done, rate,
ETA) every ``interval`` seconds (``--heartbeat``).
"""

from __future__ import annotations

import sys
import threading
import time
from datetime import datetime


def _duration(seconds: float) -> str:
    seconds = int(round(seconds))
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}h{m:02d}m{s:02d}s" if h else (f"{m}m{s:02d}s" if m else f"{s}s")


class Progress:
    """Counts finished points of ``total``; ``already`` were done before this run started.

    ``bar``: a tqdm bar when ``stream`` is a terminal. Otherwise, and always without ``bar``
    (``--no-progress``), a heartbeat line (points done, rate, ETA) every ``interval`` seconds
    from a timer thread, so that a log shows life even while one long task runs; ``interval``
    0 prints none. Without a terminal, ``bar`` also logs the line of the last point.

    ``side = (done, total)`` counts the predicted-transition lines computed beside the points
    (shown after the points; they do not enter the points' rate).
    """

    def __init__(self, total: int, already: int = 0, *, stream=None, interval: float = 60.0,
                 bar: bool = True, label: str = "",
                 side: tuple[int, int] | None = None) -> None:
        self.total, self.already = total, already
        self.side = list(side) if side is not None else None
        self.label = label  # e.g. "pass 1 of 2, bulk": which pass of a [confirm] run
        self.count = already
        self.stream = stream if stream is not None else sys.stderr
        self.interval = interval
        self.log_end = bar
        self.start = time.monotonic()
        self.bar = None
        self._stop = threading.Event()
        self._lock = threading.Lock()
        self._thread = None
        if bar and getattr(self.stream, "isatty", lambda: False)():
            from tqdm import tqdm
            self.bar = tqdm(total=total, initial=already, unit="pt", file=self.stream,
                            desc=label or None,
                            dynamic_ncols=True, smoothing=0.1)
            if self.side is not None:
                self.bar.set_postfix_str(self._side_text(), refresh=False)
        elif interval > 0 and total > already:
            self._thread = threading.Thread(target=self._beat, name="sweepcli-heartbeat",
                                            daemon=True)
            self._thread.start()

    def _beat(self) -> None:
        while not self._stop.wait(self.interval):
            self._write()

    def _write(self) -> None:
        with self._lock:
            try:
                self.stream.write(self.line() + "\n")
                self.stream.flush()
            except (OSError, ValueError):  # a closed log: nothing more to say there
                self._stop.set()

    def _side_text(self) -> str:
        return f"predicted lines {self.side[0]}/{self.side[1]}"

    def _finished(self) -> bool:
        return self.count == self.total and (self.side is None or self.side[0] == self.side[1])

    def side_update(self, n: int) -> None:
        """``n`` more prediction lines done."""
        if self.side is None:
            return
        self.side[0] += n
        if self.bar is not None:
            self.bar.set_postfix_str(self._side_text())
        elif self.log_end and self._finished():
            self._write()

    def update(self, n: int) -> None:
        self.count += n
        if self.bar is not None:
            self.bar.update(n)
        elif self.log_end and self._finished():
            self._write()

    def line(self) -> str:
        elapsed = time.monotonic() - self.start
        new = self.count - self.already
        rate = new / elapsed if elapsed > 0 else 0.0
        eta = (self.total - self.count) / rate if rate > 0 else float("nan")
        stamp = datetime.now().strftime("%Y-%m-%d %H:%M:%S")
        pct = 100.0 * self.count / self.total if self.total else 100.0
        eta_s = _duration(eta) if eta == eta else "?"
        what = f" ({self.label})" if self.label else ""
        side = f", {self._side_text()}" if self.side is not None else ""
        return (f"[{stamp}] {self.count}/{self.total} points{what} ({pct:.0f}%){side}, "
                f"{rate:.3g} points/s, elapsed {_duration(elapsed)}, ETA {eta_s}")

    def close(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join()
        if self.bar is not None:
            self.bar.close()
