"""`investigator map --out m.png`: the PNG colours the flagged records by the scan's own rank and labels every
small group (issue 16, point 6), read back from what the command drew."""

from __future__ import annotations

import numpy as np
import pytest
from matplotlib.image import imread

import investigator
from investigator.io.demo import DEMO_ID, write_demo
from investigator.output import map_plot

pytestmark = pytest.mark.slow  # a scan of the demo with its map


def test_map_command_colours_by_the_scan_rank_and_labels_every_group(cli, tmp_path, monkeypatch):
    data = write_demo(tmp_path)
    drawn = {}
    figure = map_plot.map_figure

    def watched(*args, **kwargs):
        fig, placed = figure(*args, **kwargs)
        drawn.update(kwargs=kwargs, placed=placed)
        return fig, placed

    monkeypatch.setattr(map_plot, "map_figure", watched)
    out = tmp_path / "m.png"
    code, stdout, err = cli("map", data, "--id", DEMO_ID, "--map", "pca", "--out", out)
    assert code == 0, err
    assert "Map written to" in stdout and imread(out).shape[0] > 500
    result = investigator.scan(data, id=DEMO_ID, map="pca")
    assert np.array_equal(drawn["kwargs"]["rank"], result.rank)  # the scan's ranks, copies sharing one
    texts = [label.get_text() for label in drawn["placed"].labels]
    for gid in result.groups.small_ids:
        assert f"group {gid} ({result.groups.size_of(gid)})" in texts
    assert drawn["placed"].covering == 0
