"""Run figures and `tomo plot`."""

from __future__ import annotations

from dataclasses import replace

import matplotlib.colors as mcolors
import matplotlib.image as mimage
import numpy as np
import pytest
from _runs import make_run, second_run

from tomo.analysis.coverage import covered, investigation_elevation
from tomo.cli import main
from tomo.core.errors import InputError
from tomo.figures import compare, fit, section, style
from tomo.figures.bundle import FIGURES
from tomo.figures.versus import versus_figure, versus_summary, versus_table
from tomo.results.runfile import write_run


@pytest.fixture(scope="module")
def runs():
    with_layers, mesh, model = make_run(layered=True)
    without, _, _ = make_run(layered=False)
    return with_layers, without, mesh, model


def _texts(fig):
    out = []
    for ax in fig.axes:
        out += [ax.get_title(), ax.get_xlabel(), ax.get_ylabel()]
        out += [t.get_text() for t in ax.texts]
    out += [t.get_text() for t in fig.texts]
    return " | ".join(out)


def test_velocity_section_blanks_cells_no_ray_reaches(runs):
    run, _, mesh, _ = runs
    fig = section.velocity_section(run)
    ax = fig.axes[0]
    mesh_artist = next(c for c in ax.collections if hasattr(c, "get_array") and c.get_array() is not None
                       and np.ndim(c.get_array()) == 2)
    shown = ~np.ma.getmaskarray(mesh_artist.get_array())
    # every ground cell inside the ray envelope is drawn and none below it (the row
    # above each column's top cell may be filled for drawing up to the ground line)
    ground = mesh.ground
    np.testing.assert_array_equal(shown[ground], covered(run)[ground])
    # the depth-of-investigation line is drawn where tomo.export puts it
    doi = next(line for line in ax.lines if "depth of investigation" in line.get_label())
    np.testing.assert_allclose(doi.get_ydata(), investigation_elevation(run), equal_nan=True)
    text = _texts(fig)
    assert "vertical exaggeration 1:1" in text
    assert "Distance along line (m)" in text and "Elevation (m)" in text
    assert any("P-wave velocity (m/s)" in a.get_ylabel() for a in ax.child_axes)  # the colour bar
    style.plt.close(fig)


def test_velocity_section_contours_are_labelled(runs):
    run = runs[0]
    fig = section.velocity_section(run, contours_m_s=[800.0, 1200.0])
    labels = [t.get_text() for t in fig.axes[0].texts]
    assert "800" in labels and "1200" in labels
    style.plt.close(fig)


def test_exaggeration_choice():
    # 1, 1.5, 2, 3, 4, 5 : the smallest that draws the section at least 0.28 as tall as wide
    assert section.choose_exaggeration(100.0, 40.0) == 1.0
    assert section.choose_exaggeration(100.0, 20.0) == 1.5   # 1.5 * 0.2 = 0.30
    assert section.choose_exaggeration(100.0, 10.0) == 3.0   # 3 * 0.1 = 0.30; 2 * 0.1 = 0.2 too flat
    assert section.choose_exaggeration(1000.0, 10.0) == 5.0


def test_contour_levels_are_round():
    levels = section.contour_levels(np.array([430.0, 2950.0]))
    assert np.all(np.mod(levels, 250.0) == 0) and levels.min() > 430 and levels.max() < 2950


def test_colours_are_okabe_ito(runs):
    run = runs[0]
    fig = compare.layered_vs_gridded(run)
    palette = {mcolors.to_hex(c) for c in style.PALETTE} | {"#ffffff", "#7f7f7f"}
    for ax in fig.axes:
        for line in ax.lines:
            assert mcolors.to_hex(line.get_color()) in palette, line.get_label()
    style.plt.close(fig)


def test_fit_figures(runs):
    run = runs[0]
    fig = fit.traveltime_fit(run)
    ax = fig.axes[0]
    # one observed series and the computed lines for each of the 3 shots
    observed = [line for line in ax.lines if line.get_marker() == "o" and len(line.get_xdata()) > 0]
    assert len(observed) == 3
    np.testing.assert_allclose(np.sort(np.concatenate([l.get_ydata() for l in observed])),
                               np.sort(run.picks["observed_ms"]))
    assert "First-arrival time (ms)" in _texts(fig)
    style.plt.close(fig)
    fig = fit.residual_figure(run)
    text = _texts(fig)
    assert "Residual (ms)" in text and "Offset" in text and f"chi-squared {run.chi2:.2f}" in text
    style.plt.close(fig)
    fig = fit.misfit_history(run)
    chi2_line = fig.axes[0].lines[0]
    np.testing.assert_allclose(chi2_line.get_ydata(), run.history["chi2"])
    style.plt.close(fig)


def test_compare_figure_needs_layered_result(runs):
    with_layers, without, _, _ = runs
    assert compare.layered_vs_gridded(without) is None
    fig = compare.layered_vs_gridded(with_layers)
    assert fig is not None
    assert with_layers.settings["start"] == "layered" and "started from this layered model" in fig.axes[0].get_title()
    style.plt.close(fig)


def test_compare_table_differences(runs):
    run, _, _, model = runs
    table = compare.compare_table(run)
    # the contour is the mean of the layer velocities above and below (510 and 1480 m/s)
    assert table["contour_m_s"] == pytest.approx((510.0 + 1480.0) / 2)
    np.testing.assert_allclose(table["difference_m"], table["contour_elevation_m"] - table["refractor_elevation_m"])
    # the fake refractor is 0.2 m below the true base; the contour of the cell-averaged
    # model lies within a cell (1 m) of the true base, so within 1.2 m of the refractor
    assert np.nanmax(np.abs(table["difference_m"])) < 1.2
    # no uncertainty in the profile: estimated from the pick sigma (Hagedoorn 1959 depth
    # formula; sqrt(3) sigma for a plus time of three picks), here sigma = 0.3 ms
    v1, v2 = 510.0, 1480.0
    expected = np.sqrt(3.0) * 0.3e-3 * v1 * v2 / (2 * np.sqrt(v2**2 - v1**2))
    np.testing.assert_allclose(table["sigma_m"], expected)


def test_profile_from_layers_json_columns():
    # the layout tomo.layered writes: a delay_time_profile with a "columns" table
    layered = {"layers": [{"velocity_m_s": 400.0}, {"velocity_m_s": 1600.0}],
               "delay_time_profile": {"columns": {
                   "refractor": [1, 1, 1], "x": [0.0, 2.0, 4.0], "surface_z": [10.0, 10.0, 10.0],
                   "depth_m": [3.0, None, 3.5], "elevation_m": [7.0, None, 6.5],
                   "uncertainty_m": [0.2, None, 0.3], "velocity_m_s": [1600.0, 1600.0, 1600.0],
                   "method": ["plus-minus"] * 3}}}
    prof = compare.refractor_profiles(layered)[1]
    np.testing.assert_allclose(prof["x"], [0.0, 4.0])
    np.testing.assert_allclose(prof["elevation_m"], [7.0, 6.5])
    np.testing.assert_allclose(prof["sigma_m"], [0.2, 0.3])


def test_plot_command_writes_png_and_pdf(tmp_path, runs, capsys):
    path = tmp_path / "run.h5"
    write_run(path, runs[0])
    out = tmp_path / "figs"
    assert main(["plot", str(path), "--out", str(out)]) == 0
    names = sorted(p.name for p in out.iterdir())
    assert names == sorted(f"{spec.name}.{fmt}" for spec in FIGURES for fmt in ("png", "pdf"))
    for spec in FIGURES:
        image = mimage.imread(out / f"{spec.name}.png")
        # A4 width: 7 in at 200 dpi is 1400 px; bbox "tight" trims or adds a little
        # (most from the figures without a colour bar: the depth figure keeps 1194 px)
        assert image.shape[1] >= 1150
        assert (out / f"{spec.name}.pdf").read_bytes()[:5] == b"%PDF-"


def test_plot_without_layered_skips_comparison_with_note(tmp_path, runs, capsys):
    path = tmp_path / "run.h5"
    write_run(path, runs[1])
    out = tmp_path / "figs"
    assert main(["plot", str(path), "--out", str(out), "--format", "png"]) == 0
    assert "skipped the 'compare' figure" in capsys.readouterr().err
    assert not (out / "compare.png").exists() and (out / "velocity.png").exists()


def test_plot_into_unusable_folder(tmp_path, runs, capsys):
    path = tmp_path / "run.h5"
    write_run(path, runs[1])
    blocker = tmp_path / "file.txt"
    blocker.write_text("a file, not a folder")
    assert main(["plot", str(path), "--out", str(blocker / "figs")]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "cannot create the output folder" in err
    assert main(["plot", str(path), "--out", str(blocker)]) == 2
    assert "not a folder" in capsys.readouterr().err


# --- two runs of one line (tomo.figures.versus, tomo plot --versus) -----------------

@pytest.fixture(scope="module")
def moved():
    # the same line with the refractor one cell (1 m) deeper: the rasterised model is the
    # first one moved down by exactly one row, so its iso-velocity surface is too
    # (translation invariance of the sampling; exact up to rounding)
    run, mesh, _ = make_run(layered=True)
    deeper = second_run(run, mesh.cell)
    assert mesh.cell == 1.0
    return run, deeper


def test_versus_table_of_a_refractor_moved_one_cell_down(moved):
    run, deeper = moved
    table = versus_table(run, deeper)
    assert table["contour_m_s"] == pytest.approx(0.5 * (510.0 + 1480.0))  # from run's layered result
    ok = table["constrained"]
    assert ok.sum() >= 20
    np.testing.assert_allclose(table["difference_m"][ok], -1.0, atol=1e-9)
    rx = run.picks["receiver_x"]
    assert np.all((table["x"][ok] >= rx.min()) & (table["x"][ok] <= rx.max()))
    line = versus_summary(table, ("a", "b"))
    # the elevation difference -1 m is a depth difference of +1 m: said as a depth, with its sign
    assert "995 m/s surface: b puts it on average 1.00 m deeper than a (depth difference +1.00 m" in line
    assert "RMS 1.00 m" in line


def test_versus_figure_draws_both_surfaces(moved):
    run, deeper = moved
    fig = versus_figure(run, deeper, labels=("first.h5", "second.h5"))
    text = _texts(fig)
    assert "Distance along line (m)" in text and "Depth difference (m)" in text and "RMS 1.00 m" in text
    labels = fig.axes[0].get_legend_handles_labels()[1]
    assert "995 m/s surface, first.h5" in labels and "995 m/s surface, second.h5" in labels
    style.plt.close(fig)


def test_versus_bad_input(moved):
    run, deeper = moved
    without, _, _ = make_run(layered=False)
    with pytest.raises(InputError, match="give the contour velocity"):
        versus_table(without, deeper)
    with pytest.raises(InputError, match="second: .*outside the model's range"):
        versus_table(run, replace(deeper, velocity=deeper.velocity * 0.1), 995.0, labels=("first", "second"))
    far = replace(deeper, x=deeper.x + 1000.0)
    with pytest.raises(InputError, match="share no part of the line"):
        versus_table(run, far, 995.0)


def test_plot_versus_writes_the_comparison_and_says_how_far_apart(tmp_path, moved, capsys):
    run, deeper = moved
    a, b = tmp_path / "a.h5", tmp_path / "b.h5"
    write_run(a, run)
    write_run(b, deeper)
    out = tmp_path / "figs"
    assert main(["plot", str(a), "--out", str(out), "--format", "png", "--versus", str(b)]) == 0
    assert (out / "versus.png").is_file()
    said = capsys.readouterr().out
    assert "b.h5 (layered start) puts it on average 1.00 m deeper than a.h5 (layered start)" in said
    # --contour alone, and a contour outside a model: one line, exit 2, nothing written
    empty = tmp_path / "none"
    assert main(["plot", str(a), "--out", str(empty), "--contour", "900"]) == 2
    assert main(["plot", str(a), "--out", str(empty), "--versus", str(b), "--contour", "9000"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 2 and "--versus" in err[0] and "outside the model's range" in err[1]
    assert not empty.exists()
