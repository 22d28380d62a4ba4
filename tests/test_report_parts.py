"""The report's parts: the project file, the settings in words, paths cut to names,
the depth range and the picks digest."""

from __future__ import annotations

import numpy as np
import pytest
from _runs import make_run, second_run

from tomo.analysis.depth_range import DepthRange, two_run_range
from tomo.analysis.digest import check_same_picks, picks_digest
from tomo.cli import main
from tomo.core.errors import InputError
from tomo.results.report_html import no_folders
from tomo.results.report_settings import settings_rows
from tomo.survey.project import read_project
from tomo.tomography.settings import InversionSettings


def test_project_file_and_options(tmp_path):
    path = tmp_path / "project.toml"
    path.write_text('project = "Wall"\nline = "L2"\nsurvey_date = 2026-05-12\nrevision = "A"\n', encoding="utf-8")
    info = read_project(path, {"revision": "B"})
    assert info.title == "Wall - L2" and info.survey_date == "2026-05-12" and info.revision == "B"
    assert ("Survey date", "2026-05-12") in info.rows()
    path.write_text('projekt = "misspelt"\n', encoding="utf-8")
    with pytest.raises(InputError, match=r"project\.toml: field 'projekt': unknown project field"):
        read_project(path)


def test_report_info_option_must_be_key_value(tmp_path, capsys):
    run, _, _ = make_run(layered=False)
    from tomo.results.runfile import write_run

    write_run(tmp_path / "run.h5", run)
    assert main(["report", str(tmp_path / "run.h5"), "--out", str(tmp_path / "r.html"), "--info", "client"]) == 2
    assert "expected KEY=VALUE" in capsys.readouterr().err


def test_every_inversion_setting_is_said_in_words():
    # a setting the report does not know would be listed under "Other" by its key
    recorded = dict(InversionSettings().as_dict(), v_min_m_s_used=150.0, v_max_m_s_used=7000.0,
                    sigma_default_used=False, reference="none", start="layered", start_requested="layered",
                    layered_branches=None, start_smoothing_cells=2.0, picks_file="/data/line/picks.csv",
                    terrain_file=None, mesh_file=None, stations_file=None,
                    mesh_spec={"cell_m": 1.0, "depth_m": 40.0, "padding_m": 5.0, "refine": 3})
    rows = settings_rows(recorded)
    assert not [r for r in rows if r[0] == "Other"]
    text = " ".join(str(v) for row in rows for v in row)
    assert "/data/line" not in text and "picks.csv" in text
    assert "_" not in " ".join(label for _, label, _ in rows)


def test_paths_are_cut_to_file_names():
    # a folder with a space is cut by the paths the run names (known_paths), see below
    assert no_folders("/home/a line/x/picks.csv: 2 skipped", ["/home/a line/x/picks.csv"]) == "picks.csv: 2 skipped"
    assert no_folders("/home/a/x/picks.csv: 2 skipped") == "picks.csv: 2 skipped"
    assert no_folders(r"C:\data\line1\run.h5 done") == "run.h5 done"
    for text in ("1327 m/s", "k = 0.5 1/s", "0.5/2.5 m", "and/or"):
        assert no_folders(text) == text


def test_digest_tells_same_picks_from_others():
    run, mesh, _ = make_run(layered=True)
    same, other = second_run(run, mesh.cell), make_run(layered=False, base_shift_m=mesh.cell)[0]
    assert picks_digest(run.picks) == picks_digest(same.picks) != picks_digest(other.picks)
    # the order of the picks does not matter, their values do
    order = np.arange(len(run.picks["source_x"]))[::-1]
    shuffled = {k: np.asarray(v)[order] for k, v in run.picks.items()}
    assert picks_digest(shuffled) == picks_digest(run.picks)
    assert check_same_picks(run, same) == []
    with pytest.raises(InputError, match="different times at"):
        check_same_picks(run, other)
    # another line: the geophones elsewhere (here 100 m along)
    moved = dict(run.picks, receiver_x=np.asarray(run.picks["receiver_x"]) + 100.0)
    with pytest.raises(InputError, match="different shots or geophones .*geophones at x = 0 to 33 m against .*100"):
        check_same_picks(run, type(run)(**{**run.__dict__, "picks": moved}))


def test_two_run_range_brackets_both_surfaces():
    # the second run's refractor lies one cell (1 m) deeper: the range is 1 m wide
    # wherever both are constrained (exact: the model moved down by one row)
    run, mesh, _ = make_run(layered=True)
    r = two_run_range(run, second_run(run, mesh.cell), 995.0)
    ok = np.isfinite(r.shallow_m)
    assert ok.sum() >= 20
    np.testing.assert_allclose(r.deep_m[ok] - r.shallow_m[ok], 1.0, atol=1e-9)
    lo, hi = r.at([r.x[ok][0], 1e6])
    assert np.isfinite(lo[0]) and np.isnan(hi[1])


def test_depth_range_has_no_value_across_a_gap():
    r = DepthRange(np.array([0.0, 1.0, 2.0, 3.0]), np.array([1.0, np.nan, 1.0, 1.0]),
                   np.array([2.0, np.nan, 2.0, 2.0]), "ensemble", "test")
    lo, hi = r.at([0.5, 2.5])
    assert np.isnan(lo[0]) and lo[1] == pytest.approx(1.0) and hi[1] == pytest.approx(2.0)
