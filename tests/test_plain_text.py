"""User text in pictures is never parsed as markup (issue 10.11): a ``$`` in a title,
file name, mask, segment or zone name draws as itself."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from acquire.cli import main
from acquire.plaintext import plain_text
from acquire.sweep import Sweep
from acquire.touchstone import write_touchstone

F = np.linspace(2.3e9, 2.6e9, 101)
NASTY = ["$\\frac{1}{$", "price $5 and $6", "$x^2$", "a$b", "$$", "\\$", "$\\undefinedcmd$"]


def test_plain_text_escapes_every_dollar() -> None:
    assert plain_text("cost $5") == r"cost \$5"
    assert plain_text("$x$") == r"\$x\$"
    assert plain_text("no markup") == "no markup"


@pytest.mark.parametrize("text", NASTY)
def test_plain_text_draws_as_itself(text: str) -> None:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure()
    ax = fig.add_subplot()
    label = ax.text(0, 0, plain_text(text))
    FigureCanvasAgg(fig).draw()  # math markup would raise ValueError on the bad ones here
    # What the library draws (its own preprocessing step): the text as typed, not math.
    assert label._preprocess_math(label.get_text()) == (text, False)


def _mask(tmp_path: Path, name: str) -> Path:
    path = tmp_path / "m.yaml"
    quoted = name.replace("\\", "\\\\").replace('"', '\\"')
    path.write_text(f'name: "{quoted}"\nquantity: swr\nsegments:\n'
                    f'  - {{name: "{quoted}", from: 2.4 GHz, to: 2.5 GHz, upper: 3}}\n')
    return path


@pytest.mark.parametrize("text", [NASTY[0], NASTY[1], NASTY[6]])
def test_plot_command_with_dollars_everywhere(tmp_path: Path, capsys, text: str) -> None:
    folder = tmp_path / text.replace("/", "_")
    folder.mkdir()
    s = (0.2 * np.exp(1j * F / 1e8)).reshape(-1, 1, 1)
    unit = write_touchstone(folder / "unit$1$.s1p", Sweep(F, s))
    out = folder / "page.png"
    code = main(["plot", str(unit), "--mask", str(_mask(folder, text)), "--title", text,
                 "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 0, err
    assert out.stat().st_size > 1000


@pytest.mark.parametrize("text", NASTY[:2])
def test_dtf_picture_with_dollars(tmp_path: Path, capsys, text: str) -> None:
    from dtf_line import line_s11

    f = np.linspace(10e6, 1e9, 401)
    s11 = line_s11(f, [(50.0, 5.0), (75.0, 1.0)], 50.0).reshape(-1, 1, 1)
    unit = write_touchstone(tmp_path / "feed$1$.s1p", Sweep(f, s11))
    mask = tmp_path / "d.yaml"
    quoted = text.replace("\\", "\\\\").replace('"', '\\"')
    mask.write_text(f'domain: distance\nname: "{quoted}"\nzones:\n'
                    f'  - {{name: "{quoted}", from: 0 m, to: 3 m, lower: 10 dB}}\n')
    out = tmp_path / "dtf.png"
    code = main(["dtf", str(unit), "--velocity", "0.66", "--mask", str(mask), "--title", text,
                 "-o", str(out)])
    err = capsys.readouterr().err
    assert code in (0, 1), err
    assert out.stat().st_size > 1000
