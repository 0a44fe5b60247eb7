"""Pictures: files are written (PNG/SVG), show what they claim, and bad requests exit 2."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

pytest.importorskip("matplotlib")

import budget  # noqa: E402
from budget import plots  # noqa: E402
from budget.check import check  # noqa: E402
from budget.cli import main  # noqa: E402
from budget.errors import ArgumentError  # noqa: E402

DESIGNS = Path(__file__).parent / "designs"
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


def test_waveform_png_and_svg_are_written(tmp_path):
    design = budget.load(DESIGNS / "robust.toml")
    png, svg = tmp_path / "w.png", tmp_path / "w.svg"
    plots.save(plots.waveform_figure(design, "TX", "rise"), png)
    plots.save(plots.waveform_figure(design, "TX", "fall", corners=False), svg)
    assert png.read_bytes()[:8] == PNG_MAGIC and png.stat().st_size > 10_000
    assert b"<svg" in svg.read_bytes()[:2000]


def test_waveform_figure_highlights_the_same_worst_corner_as_the_check():
    # The figure picks its highlighted corner from the waveforms it draws; it
    # must be the corner the check lists as worst for that driver, receiver, edge.
    design = budget.load(DESIGNS / "robust.toml")
    report = check(design, corners=True)
    row = report.rows(analysis="corners", driver="TX", receiver="RX", edge="fall")[0]
    fig = plots.waveform_figure(design, "TX", "fall")
    ax = fig.axes[0]
    assert ax.get_title() == f"RX: headroom {row['headroom']:+.3f} V ({row['corner']})"
    labels = [line.get_label() for line in ax.get_lines()]
    assert "nominal" in labels and f"worst: {row['corner']}" in labels
    grey = [line for line in ax.get_lines() if line.get_color() == plots.CORNER]
    assert len(grey) == 32 - 1                           # every other corner drawn in grey
    assert any(p.get_label().startswith("threshold region") for p in ax.patches)   # the shaded band
    import matplotlib.pyplot as plt
    plt.close(fig)


def test_margin_map_png(tmp_path):
    report = check(budget.load(DESIGNS / "failing_overshoot.toml"))
    out = tmp_path / "map.png"
    plots.save(plots.margin_map_figure(report), out)
    assert out.read_bytes()[:8] == PNG_MAGIC and out.stat().st_size > 10_000


def test_unknown_picture_format_is_refused_and_nothing_written(tmp_path):
    design = budget.load(DESIGNS / "robust.toml")
    with pytest.raises(ArgumentError, match=r"\.png, \.svg, \.pdf"):
        plots.save(plots.waveform_figure(design, "TX", "rise", corners=False), tmp_path / "w.bmp")
    assert list(tmp_path.iterdir()) == []


def test_plot_command_waveforms_and_map(capsys, tmp_path):
    w = tmp_path / "short.png"
    assert main(["plot", "example:short-bus", "--driver", "CTRL", "--edge", "rise", "--out", str(w)]) == 0
    assert w.read_bytes()[:8] == PNG_MAGIC
    m = tmp_path / "map.svg"
    assert main(["plot", "example:short-bus", "--map", "--corners", "--out", str(m)]) == 0
    assert b"<svg" in m.read_bytes()[:2000]
    out = capsys.readouterr().out
    assert f"wrote {w}" in out and f"wrote {m}" in out


BAD = [
    ("bad-suffix", ["--driver", "CTRL", "--edge", "rise", "--out", "{tmp}/w.bmp"], "unknown picture format"),
    ("no-driver", ["--edge", "rise", "--out", "{tmp}/w.png"], "--driver and --edge"),
    ("unknown-driver", ["--driver", "NOPE", "--edge", "rise", "--out", "{tmp}/w.png"], "unknown tap 'NOPE'"),
    ("receiver-only-tap", ["--driver", "MEM1", "--edge", "rise", "--out", "{tmp}/w.png"], "cannot drive"),
    ("unknown-receiver", ["--driver", "CTRL", "--edge", "rise", "--receiver", "X", "--out", "{tmp}/w.png"],
     "not a receiver"),
    ("missing-folder", ["--driver", "CTRL", "--edge", "rise", "--out", "{tmp}/no/w.png"], "does not exist"),
]


@pytest.mark.parametrize("args, message", [b[1:] for b in BAD], ids=[b[0] for b in BAD])
def test_bad_plot_requests_exit_2(capsys, tmp_path, args, message):
    argv = ["plot", "example:short-bus"] + [a.replace("{tmp}", str(tmp_path)) for a in args]
    assert main(argv) == 2
    out, err = capsys.readouterr()
    assert re.search(re.escape(message), err), err
    assert list(tmp_path.iterdir()) == []
