"""tomo report: one self-contained HTML file with every figure and the cautions."""

from __future__ import annotations

import base64
import re
from dataclasses import replace

import numpy as np
import pytest
from _runs import make_run, second_run

from tomo.cli import main
from tomo.figures.bundle import FIGURES
from tomo.results.report import CAUTIONS, LAYERED_START_NOTE, build_report, pick_qc
from tomo.results.runfile import write_run

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def reports(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    out = {}
    for layered in (True, False):
        run, _, _ = make_run(layered=layered)
        path = folder / f"run_{layered}.h5"
        write_run(path, run)
        html_path = folder / f"report_{layered}.html"
        assert main(["report", str(path), "--out", str(html_path)]) == 0
        out[layered] = (run, html_path.read_text(encoding="utf-8"))
    return out


def _images(text):
    return re.findall(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"', text)


def test_report_holds_every_figure_as_embedded_png(reports):
    run, text = reports[True]
    images = _images(text)
    assert len(images) == len(FIGURES)
    for data in images:
        assert base64.b64decode(data)[:8] == PNG_SIGNATURE
    for spec in FIGURES:
        assert f'id="fig-{spec.name}"' in text


def test_report_is_self_contained(reports):
    for _, text in reports.values():
        assert "<script" not in text and "<link" not in text
        assert not re.search(r'src="(?!data:)', text)  # every image inline
        assert "http://" not in text and "https://" not in text


def test_report_carries_the_cautions(reports):
    for _, text in reports.values():
        low = text.lower()
        for head, _ in CAUTIONS:
            assert head.lower() in low
        for words in ("non-unique", "hidden layer", "velocity inversion", "rock type", "rippab",
                      "borehole", "licensed professional", "local codes", "increases with depth"):
            assert words in low, words


def test_report_sections_and_numbers(reports):
    run, text = reports[True]
    headings = re.findall(r'<h2 id="[a-z]+">(\d+)\. ([^<]+)</h2>', text)
    # every section numbered, in order, the cautions last
    assert [int(n) for n, _ in headings] == list(range(1, len(headings) + 1))
    names = [name for _, name in headings]
    for heading in ("Project", "Survey and data", "Pick quality", "Settings", "Layered interpretation",
                    "Tomography: fit to the picks", "Depth to the deepest refractor", "Figures",
                    "Interpretation cautions"):
        assert heading in names, heading
    assert names[-1] == "Interpretation cautions"
    assert re.findall(r"<h3>(\d+\.\d+) ", text)  # subsections numbered too
    assert "<td>Picks</td><td>36</td>" in text
    assert "3 (x = -2 to 35 m)" in text          # shots
    assert "12, stations 1 to 12 at x = 0 to 33 m" in text  # geophones
    assert f"<b>{run.chi2:.2f}</b>" in text and f"<b>{run.rms_ms:.2f} ms</b>" in text
    assert "510" in text and "1480" in text      # the layered table
    assert "made-up warning for the report test" in text
    assert "Most iterations" in text and "max_iterations" not in text  # settings in words
    assert "tomogram's 995 m/s surface" in text  # contour of the layered refractor (510 + 1480) / 2


def test_report_says_when_the_tomography_started_from_the_layers(reports):
    # the agreement of a tomogram with the layered model it started from is partly
    # inherited; the report says so for a layered start only
    run, text = reports[True]
    assert run.settings["start"] == "layered" and LAYERED_START_NOTE in text
    gradient = replace(run, settings=dict(run.settings, start="gradient"))
    assert LAYERED_START_NOTE not in build_report(gradient)


def test_report_versus_a_second_run(tmp_path, capsys):
    # the second run's refractor lies one cell (1 m) deeper: the comparison says so,
    # as a depth (exact; see tests/test_figures.py), embeds its figure and gives the
    # depth table its range
    a, b = tmp_path / "a.h5", tmp_path / "b.h5"
    run, mesh, _ = make_run(layered=True)
    write_run(a, run)
    write_run(b, second_run(run, mesh.cell))
    out = tmp_path / "report.html"
    assert main(["report", str(a), "--out", str(out), "--versus", str(b)]) == 0
    text = out.read_text(encoding="utf-8")
    n = len(FIGURES) + 1
    assert (f"Against a second run of these picks (Figure {n}): 995 m/s surface: b.h5 (layered start) puts it on "
            "average 1.00 m deeper than a.h5") in text
    assert text.index("Against a second run") < text.index('id="fig-versus"') < text.index(f"Figure {n}.</b>")
    assert "depth difference +1.00 m, positive deeper; RMS 1.00 m" in text
    assert 'id="fig-versus"' in text and len(_images(text)) == len(FIGURES) + 1
    assert "<b>Range:</b> between the 995 m/s surfaces of a.h5" in text
    # a contour outside the second model: one line, exit 2, no report
    bad = tmp_path / "bad.html"
    assert main(["report", str(a), "--out", str(bad), "--versus", str(b), "--contour", "4000"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "outside the model's range" in err[0] and not bad.exists()


def test_report_refuses_runs_of_other_picks(tmp_path, capsys):
    # a run of other picks (here: the times of another ground) is no second run of
    # these: refused with what differs, one line, no report (issue 15)
    a, b = tmp_path / "a.h5", tmp_path / "b.h5"
    run, mesh, _ = make_run(layered=True)
    write_run(a, run)
    write_run(b, make_run(layered=False, base_shift_m=mesh.cell)[0])
    out = tmp_path / "report.html"
    for argv in (["report", str(a), "--out", str(out), "--versus", str(b)],
                 ["plot", str(a), "--out", str(tmp_path / "figs"), "--versus", str(b)]):
        assert main(argv) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and "do not hold the same picks" in err[0] and "different times" in err[0], err
    assert not out.exists() and not (tmp_path / "figs" / "versus.png").exists()


def test_old_run_file_without_digest_is_compared_with_a_notice(tmp_path, capsys):
    import h5py

    a, b = tmp_path / "a.h5", tmp_path / "b.h5"
    run, mesh, _ = make_run(layered=True)
    write_run(a, run)
    write_run(b, second_run(run, mesh.cell))
    with h5py.File(b, "r+") as f:  # a run file written before the digest existed
        del f.attrs["picks_digest"]
    out = tmp_path / "report.html"
    assert main(["report", str(a), "--out", str(out), "--versus", str(b)]) == 0
    err = capsys.readouterr().err
    assert "older run file without a picks digest" in err
    assert "older run file without a picks digest" in out.read_text(encoding="utf-8")


def test_report_without_layered_result_says_so(reports):
    _, text = reports[False]
    assert len(_images(text)) == len(FIGURES) - 2  # no layered comparison, no rock velocity for the depth figure
    assert "holds no layered interpretation" in text
    assert "comparison is left out" in text


def test_pick_qc_is_that_of_tomo_check(reports):
    from tomo.layered.qc import RECIPROCAL_TOL_MS

    run, text = reports[True]
    # two shots at geophone positions 0 and 33 m recorded at each other's position
    picks = {"source_x": np.array([0.0, 33.0, 0.0, 33.0]), "receiver_x": np.array([33.0, 0.0, 15.0, 15.0]),
             "source_z": np.zeros(4), "receiver_z": np.zeros(4),
             "observed_ms": np.array([20.0, 23.5, 10.0, 10.0]), "computed_ms": np.array([20.5, 20.5, 10.0, 10.0]),
             "sigma_ms": np.full(4, 0.3)}
    qc = pick_qc(replace(run, picks=picks))
    assert len(qc.reciprocal_pairs) == 1
    p = qc.reciprocal_pairs[0]
    assert abs(p["difference_ms"]) == pytest.approx(3.5)
    # beyond the tolerance of tomo check (2 ms or 3 %; common practice: 1-2 ms or a few per cent)
    assert p["flagged"] and p["tolerance_ms"] == pytest.approx(max(RECIPROCAL_TOL_MS, 0.03 * 21.75))
    assert "reciprocal pair" in text or "No reciprocal pairs" in text


def test_report_to_missing_folder(tmp_path, capsys):
    run, _, _ = make_run(layered=False)
    path = tmp_path / "run.h5"
    write_run(path, run)
    out = tmp_path / "nowhere" / "report.html"
    assert main(["report", str(path), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "output folder does not exist" in err
    assert not out.exists()
