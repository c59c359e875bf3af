"""Progress of a breeding run: a live bar on a terminal, plain lines otherwise."""

from __future__ import annotations

import sys


def fitness_text(cfg: dict, v) -> str:
    """A fitness value in the words of its metric."""
    if v is None:
        return "-"
    if cfg["fitness"]["metric"] == "tts":
        return f"{10 ** v:.3g} sw"
    if cfg["fitness"]["metric"] == "success":  # the fitness ranks 1 - p; show p
        return f"p {1 - v:.4g}"
    return f"{v:.4g}"


def _minutes(seconds: float) -> str:
    return f"{seconds:.0f} s" if seconds < 90 else f"{seconds / 60:.0f} min"


class Progress:
    """Call ``update(record)`` once per generation; use as a context manager."""

    def __init__(self, cfg: dict, quiet: bool = False, stream=None):
        self.cfg = cfg
        self.quiet = quiet
        self.stream = stream or sys.stderr
        self.total = cfg["search"]["generations"]
        self._bar = None
        self._task = None

    def __enter__(self):
        if not self.quiet and self.stream.isatty():
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress as Bar, TextColumn, TimeRemainingColumn

            self._bar = Bar(TextColumn("generation"), MofNCompleteColumn(), BarColumn(),
                            TextColumn("{task.fields[status]}"), TimeRemainingColumn(),
                            console=Console(file=self.stream), transient=False)
            self._bar.__enter__()
            self._task = self._bar.add_task("breed", total=self.total, status="measuring the first population")
        return self

    def __exit__(self, *exc):
        if self._bar is not None:
            self._bar.__exit__(*exc)

    def update(self, r: dict):
        if self.quiet:
            return
        eps = r.get("evaluations_per_second")
        status = (f"best {fitness_text(self.cfg, r['best'])} · median {fitness_text(self.cfg, r['median'])} · "
                  f"confirmed {fitness_text(self.cfg, r['best_confirmed'])} · "
                  f"{eps:.1f} eval/s" if eps else "")
        if self._bar is not None:
            self._bar.update(self._task, completed=r["generation"], status=status)
        else:
            left = self.total - r["generation"]
            if left > 0 and r.get("elapsed"):
                status += f" · about {_minutes(left * r['elapsed'] / r['generation'])} left"
            self.stream.write(f"generation {r['generation']}/{self.total}: {status}\n")
            self.stream.flush()
