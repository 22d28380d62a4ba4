"""Reading shot records (issue 13): SEG-2 written byte by byte from the published
standard, ObsPy's own SEG-2 test records, SEG-Y round trips, layouts, and bad input."""

import gzip
import struct
from pathlib import Path

import numpy as np
import pytest

from tomo.cli import main
from tomo.core.errors import InputError
from tomo.records.layout import read_layout
from tomo.records.reading import read_record, stack_gathers
from tomo.records.synthetic import RecordSettings, synthetic_gather, write_segy


def _string(text):
    """One SEG-2 free-form string: a 2-byte offset to the next string (counting itself),
    the text, a NUL terminator, padded to an even length."""
    body = text.encode("ascii") + b"\x00"
    if (len(body) + 2) % 2:
        body += b"\x00"
    return struct.pack("<H", len(body) + 2) + body


def write_seg2(path, traces, dt_s, delay_s, source, receivers, extra=()):
    """A SEG-2 file from Pullan (1990), "Recommended standard for seismic (/radar) data
    files in the personal computer environment", Geophysics 55, 1260-1271: a 32-byte
    file descriptor block (block id 0x3a55, revision 1, size of the trace pointer
    sub-block, number of traces, string and line terminators), the trace pointers
    (4-byte unsigned, little endian), the file's free-form strings ending in a zero
    offset; per trace a 32-byte trace descriptor block (block id 0x4422, size of the
    block, size of the data, number of samples, data format code 4 = 32-bit float), its
    strings, then the samples. Written here, field by field, without the reader."""
    n = len(traces)
    pointer_block = 4 * n
    file_strings = _string("ACQUISITION_DATE 01/JAN/2024") + _string("UNITS METERS") + b"\x00\x00"
    offset = 32 + pointer_block + len(file_strings)
    blocks, pointers = [], []
    for k, data in enumerate(traces):
        strings = b"".join(_string(s) for s in (
            f"CHANNEL_NUMBER {k + 1}", f"SAMPLE_INTERVAL {dt_s!r}", f"DELAY {delay_s!r}",
            f"SOURCE_LOCATION {source!r}", f"RECEIVER_LOCATION {receivers[k]!r}", "STACK 4", *extra)) + b"\x00\x00"
        strings += b"\x00" * (-(32 + len(strings)) % 4)          # block size a multiple of 4
        samples = np.asarray(data, dtype="<f4").tobytes()
        head = struct.pack("<HHIIB", 0x4422, 32 + len(strings), len(samples), len(data), 4) + b"\x00" * 19
        blocks.append(head + strings + samples)
        pointers.append(offset)
        offset += len(blocks[-1])
    descriptor = struct.pack("<HHHHBccBcc", 0x3A55, 1, pointer_block, n, 1, b"\x00", b"\x00", 1, b"\n",
                             b"\x00") + b"\x00" * 18
    assert len(descriptor) == 32
    Path(path).write_bytes(descriptor + struct.pack(f"<{n}I", *pointers) + file_strings + b"".join(blocks))


def small_seg2(tmp_path, name="shot.sg2", **kwargs):
    rng = np.random.default_rng(7)
    traces = rng.normal(size=(4, 50)).astype(np.float32)
    path = tmp_path / name
    write_seg2(path, traces, 0.000125, -0.005, 12.5, [0.0, 2.5, 5.0, 7.5], **kwargs)
    return path, traces


def test_seg2_written_from_the_standard_reads_back_exactly(tmp_path):
    path, traces = small_seg2(tmp_path)
    g = read_record(path)
    # every sample: float32 in the file, so exactly equal once widened
    assert np.array_equal(g.data, traces.astype(float))
    # the strings were written from Python floats, so they read back exactly
    assert g.dt_s == 0.000125 and g.delay_s == -0.005 and g.stack == 4
    assert g.source_x == 12.5 and np.array_equal(g.receiver_x, [0.0, 2.5, 5.0, 7.5])
    assert np.array_equal(g.channel, [1, 2, 3, 4]) and not g.dead.any()
    # DELAY: the time of the first sample relative to the shot (Pullan 1990)
    assert g.time_s[0] == -0.005 and np.isclose(g.time_s[8], -0.004)


def test_seg2_dead_trace_type_and_three_coordinates(tmp_path):
    path, _ = small_seg2(tmp_path, extra=("TRACE_TYPE DEAD",))
    assert read_record(path).dead.all()


OBSPY_SEG2 = Path(__import__("obspy").__file__).parent / "io" / "seg2" / "tests" / "data"


@pytest.mark.parametrize("name", ["20180307_031245000.0.seg2", "20130107_103041000.CET.3c.cont.0.seg2.gz"])
@pytest.mark.filterwarnings("ignore::UserWarning")
def test_obspy_seg2_test_records_read(tmp_path, name):
    source = OBSPY_SEG2 / name
    if not source.exists():
        pytest.skip("this ObsPy build ships no SEG-2 test data")
    path = tmp_path / name.removesuffix(".gz")
    path.write_bytes(gzip.decompress(source.read_bytes()) if name.endswith(".gz") else source.read_bytes())
    layout = None
    try:
        g = read_record(path)
    except InputError as exc:  # a record without positions must say so, and read with a layout
        assert "no source and receiver positions" in str(exc)
        n = len(__import__("obspy").read(str(path)))
        rows = ["record,channel,source_x,receiver_x"] + [f"{path.name},{k + 1},0,{(k + 1) * 2.0}" for k in range(n)]
        (tmp_path / "layout.csv").write_text("\n".join(rows) + "\n")
        layout = read_layout(tmp_path / "layout.csv")
        g = read_record(path, layout)
    assert g.n_traces >= 1 and g.n_samples > 0 and np.all(np.isfinite(g.data))
    if name.startswith("20180307") and layout is None:
        # that record's strings say DELAY -0.010, SOURCE_LOCATION 1000, RECEIVER_LOCATION 1004 on channel 1
        assert g.delay_s == -0.010 and g.source_x == 1000.0 and g.receiver_x[0] == 1004.0


def test_segy_round_trip_keeps_positions_delay_and_dead(tmp_path):
    g = synthetic_gather(10.0, 101.5, np.array([0.0, 2.5, 5.0]), np.array([100.0, 100.25, 100.5]),
                         np.array([0.02, 0.015, 0.01]), RecordSettings(delay_s=-0.004), rng=np.random.default_rng(1))
    g.dead[1] = True
    write_segy(tmp_path / "s.sgy", g)
    back = read_record(tmp_path / "s.sgy")
    assert np.allclose(back.data, g.data, rtol=1e-6, atol=1e-6)  # float32 in the file
    assert back.delay_s == -0.004 and back.dt_s == g.dt_s
    assert back.source_x == 10.0 and back.source_z == 101.5
    assert np.allclose(back.receiver_x, g.receiver_x) and np.allclose(back.receiver_z, g.receiver_z)
    assert list(back.dead) == [False, True, False]


def _layout(tmp_path, name, n, source=0.0, extra=""):
    rows = ["record,channel,source_x,receiver_x" + (",polarity" if extra else "")]
    rows += [f"{name},{k + 1},{source},{2.5 * (k + 1)}" + (f",{extra}" if extra else "") for k in range(n)]
    path = tmp_path / "layout.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def test_layout_gives_positions_and_wins_over_headers(tmp_path):
    path, _ = small_seg2(tmp_path)
    g = read_record(path, read_layout(_layout(tmp_path, "shot.sg2", 4, source=-5.0, extra="-1")))
    assert g.source_x == -5.0 and np.array_equal(g.receiver_x, [2.5, 5.0, 7.5, 10.0])
    assert np.all(g.polarity == -1) and any("differ from the layout" in n for n in g.notes)


def test_records_of_one_shot_are_stacked(tmp_path):
    a, _ = small_seg2(tmp_path, "a.sg2")
    b, _ = small_seg2(tmp_path, "b.sg2")
    stacked = stack_gathers([read_record(a), read_record(b)])
    assert len(stacked) == 1 and stacked[0].stack == 8
    assert np.allclose(stacked[0].data, 2 * read_record(a).data)


def _run_pick(args, capsys):
    status = main(["pick", *args])
    return status, capsys.readouterr()


@pytest.mark.parametrize("case", ["not seismic", "no positions", "layout count", "truncated", "truncated SEG-Y",
                                  "zero length", "missing file"])
def test_bad_records_give_one_line_and_no_output(tmp_path, capsys, case):
    out = tmp_path / "picks.csv"
    args = []
    if case == "not seismic":
        bad = tmp_path / "notes.txt"
        bad.write_text("shot 1 was a misfire\n" * 20)
        words = "not a seismic record"
    elif case == "no positions":
        bad = tmp_path / "shot.sg2"
        write_seg2(bad, np.zeros((2, 20)), 0.001, 0.0, 0.0, [1.0, 2.0])
        # rewrite without locations: the strings are replaced by a record without them
        data = bad.read_bytes().replace(b"SOURCE_LOCATION", b"SOURCE_LOCATIOX")
        bad.write_bytes(data)
        words = "no source and receiver positions"
    elif case == "layout count":
        bad, _ = small_seg2(tmp_path)
        args = ["--layout", str(_layout(tmp_path, "shot.sg2", 3))]
        words = "layout lists 3 channel(s) for shot.sg2, the record has 4"
    elif case == "truncated":
        bad, _ = small_seg2(tmp_path)
        bad.write_bytes(bad.read_bytes()[:-60])
        words = "shot.sg2"
    elif case == "truncated SEG-Y":
        g = synthetic_gather(0.0, 0.0, np.array([2.5, 5.0]), np.zeros(2), np.array([0.005, 0.01]),
                             rng=np.random.default_rng(0))
        bad = write_segy(tmp_path / "shot.sgy", g)
        bad.write_bytes(bad.read_bytes()[:-100])
        words = "damaged or truncated record"
    elif case == "zero length":
        bad = tmp_path / "shot.sg2"
        write_seg2(bad, [np.zeros(10), np.zeros(0)], 0.001, 0.0, 0.0, [1.0, 2.0])
        words = "channel 2 has no samples"
    else:
        bad = tmp_path / "nowhere.sg2"
        words = "file does not exist"
    status, captured = _run_pick([str(bad), "--out", str(out), *args], capsys)
    err = captured.err.strip().splitlines()
    assert status == 2 and len(err) == 1 and words in err[0] and bad.name in err[0] + str(args), err
    assert "Traceback" not in captured.err
    assert not out.exists() and not list(tmp_path.glob("*.part"))


def test_layout_delay_wins_over_the_header(tmp_path):
    """A trigger delay known from the field (layout delay_ms) replaces the header's."""
    path, _ = small_seg2(tmp_path)
    rows = ["record,channel,source_x,receiver_x,delay_ms"]
    rows += [f"shot.sg2,{k},12.5,{2.5 * (k - 1)},2" for k in range(1, 5)]
    (tmp_path / "layout.csv").write_text("\n".join(rows) + "\n")
    g = read_record(path, read_layout(tmp_path / "layout.csv"))
    assert g.delay_s == 0.002 and g.time_s[0] == 0.002


def test_layout_errors_name_file_line_and_field(tmp_path):
    path = tmp_path / "layout.csv"
    path.write_text("record,channel,source_x,receiver_x\nshot.sg2,1,0,2.5\nshot.sg2,1,0,5.0\n")
    with pytest.raises(InputError, match=r"layout.csv:3: field 'channel': channel 1 of shot.sg2 listed twice"):
        read_layout(path)
    path.write_text("record,channel,source_x,receiver_x\nshot.sg2,1,0,2.5\nshot.sg2,2,3,five\n")
    with pytest.raises(InputError, match=r"layout.csv:3: field 'receiver_x': expected a number"):
        read_layout(path)
