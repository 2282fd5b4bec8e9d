"""Tests of pointsift.batch.progress.

Every input is invented inside the test (tmp_path); outside references are named beside each check.
"""

from __future__ import annotations

import re


from pointsift import batch
from batch_data import FAST, synthetic_points, write_gpkg


class _Terminal:
    """A text stream that says it is a terminal."""

    def __init__(self) -> None:
        import io

        self.buffer = io.StringIO()

    def write(self, text: str) -> int:
        return self.buffer.write(text)

    def flush(self) -> None:
        pass

    def isatty(self) -> bool:
        return True


def test_progress_bar_on_a_terminal_lines_otherwise_silence_with_quiet(tmp_path):
    import io

    data = tmp_path / "data"
    data.mkdir()
    for seed in range(2):
        write_gpkg(data / f"net{seed}.gpkg", {"wells": synthetic_points(50, seed=seed)})
    (data / "broken.csv").write_text("well,level_m\nW1,3.0\n")  # no coordinate columns
    assert isinstance(batch.make_progress(quiet=True, stream=_Terminal()), batch.SilentProgress)
    assert type(batch.make_progress(stream=io.StringIO())) is batch.LineProgress
    terminal = _Terminal()
    bar = batch.make_progress(stream=terminal)
    assert isinstance(bar, batch.RichProgress)
    plan = batch.plan_from_args([str(data)], out_dir=tmp_path / "a", options=FAST)
    batch.run_batch(plan, progress=bar)
    shown = re.sub(r"\x1b\[[0-9;?]*[A-Za-z]", "", terminal.buffer.getvalue())  # without terminal colour codes
    assert "3/3" in shown and "2 done, 0 up to date, 1 failed" in shown
    assert "failed broken: " in shown and "coordinate columns" in shown
    lines = io.StringIO()
    batch.run_batch(plan, progress=batch.LineProgress(lines))
    text = lines.getvalue().splitlines()
    assert text[0] == "pointsift batch: 3 units"
    # up-to-date units are reported first (found before any screening starts), then the rest
    assert text[1].startswith("[1/3] skipped-up-to-date net0 (")
    assert text[2].startswith("[2/3] skipped-up-to-date net1 (")
    assert text[3].startswith("[3/3] failed broken: ") and "coordinate columns" in text[3]
