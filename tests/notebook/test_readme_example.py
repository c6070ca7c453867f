"""The README's "In a notebook" example, run as written against a small real store.

The fenced block is read out of README.md and executed from the folder that holds the store's
``afterward-demo`` folder: a change to the handle that breaks the example fails here.
"""

from __future__ import annotations

import re
from pathlib import Path

import matplotlib
import numpy as np
import pytest

from tests.conftest import REPO
from tests.e2e.stores import Project

pytestmark = pytest.mark.timeout(300)


def readme_example() -> str:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    section = text.split("\n## In a notebook\n", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```python\n(.*?)```", section, flags=re.DOTALL)
    assert len(blocks) == 1, "the section holds one Python example"
    return blocks[0]


def test_the_readme_example_runs(small_store: Project, monkeypatch: pytest.MonkeyPatch, capsys) -> None:  # noqa: ANN001
    matplotlib.use("Agg")   # no display in CI
    import matplotlib.pyplot as plt

    monkeypatch.chdir(small_store.root.parent)
    monkeypatch.delenv("AFTERWARD_CONFIG", raising=False)
    space: dict = {}
    try:
        exec(compile(readme_example(), "README.md#in-a-notebook", "exec"), space)  # noqa: S102
        fig = space["fig"]
        # source: the store's outcomes view read with plain SQL
        rows = small_store.sql("SELECT target_date, forward_rate, realized_rate FROM outcomes WHERE curve = 'govt' "
                               "AND start_months = 12 AND tenor_months = 12 ORDER BY as_of")
        lines = fig.axes[0].get_lines()
        assert len(lines) == 2 and len(rows) > 100
        np.testing.assert_allclose(lines[0].get_ydata(), rows["forward_rate"] * 100, rtol=0, atol=1e-12)
        np.testing.assert_allclose(lines[1].get_ydata(), rows["realized_rate"] * 100, rtol=0, atol=1e-12)
    finally:
        plt.close("all")
    chart = Path(small_store.root.parent / "forward-vs-realised.png")
    assert chart.stat().st_size > 10_000
    assert abs(space["again"] - space["stored"]["forward_rate"]) < 1e-12   # the curve gives the stored forward back
    printed = capsys.readouterr().out
    assert f"{len(rows):,} forwards, mean error" in printed and "zero rates 1..10 years:" in printed
