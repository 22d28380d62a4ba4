"""`tomo synth`: forward-model first-arrival picks for a layout through a model file."""

from __future__ import annotations

from . import note, progress_printer


def register(sub):
    p = sub.add_parser(
        "synth", help="compute synthetic first-arrival picks through a model",
        description="Forward-model first-arrival times for every shot-geophone pair of a "
                    "layout through a layered model (TOML), with optional Gaussian noise.",
    )
    p.add_argument("model", metavar="MODEL.toml", help="layered model file")
    p.add_argument("--layout", required=True, metavar="LAYOUT.csv",
                   help="pick file without time_ms: the shot-geophone pairs to compute")
    p.add_argument("--out", required=True, metavar="PICKS.csv", help="pick file to write")
    p.add_argument("--terrain", metavar="T.csv", help="terrain file (wins over the model's [terrain])")
    p.add_argument("--mesh", metavar="MESH.toml",
                   help="mesh spec (default: chosen from the layout, as deep as the model's deepest first-arrival "
                        "ray needs with room to spare)")
    p.add_argument("--noise-ms", type=float, default=0.0,
                   help="standard deviation of Gaussian noise added to the times, ms (recorded as sigma_ms)")
    p.add_argument("--seed", type=int, default=None, help="seed of the noise generator")
    p.add_argument("--workers", type=int, default=1,
                   help="processes for the forward solves, at most the cores (default 1)")
    p.add_argument("--records", metavar="DIR",
                   help="also write a SEG-Y shot record per shot into DIR (a causal wavelet at each noise-free "
                        "first arrival, amplitude falling as 1/offset, white noise)")
    p.add_argument("--record-snr", type=float, default=3.0, metavar="R",
                   help="signal-to-noise ratio of the records at the line's longest offset (default 3)")
    p.add_argument("--record-dt-ms", type=float, default=0.25, metavar="MS",
                   help="record sample interval, ms (default 0.25)")
    p.set_defaults(run=run)


def run(args):
    from ..api import synthesize
    from ..core.errors import InputError

    if args.noise_ms < 0:
        raise InputError(f"--noise-ms must be >= 0, got {args.noise_ms:g}")
    record_settings = None
    if args.records:
        from ..api import RecordSettings

        record_settings = RecordSettings(dt_s=args.record_dt_ms * 1e-3, snr=args.record_snr).check()
    picks, info = synthesize(args.model, args.layout, args.out, terrain=args.terrain, mesh=args.mesh,
                             noise_ms=args.noise_ms, seed=args.seed, workers=args.workers,
                             progress=progress_printer("travel-time fields"), records_dir=args.records,
                             record_settings=record_settings)
    for message in info["notices"]:
        note(message)
    note(f"mesh: {info['mesh']}")
    if not info["depth"].startswith("warning"):
        note(f"grid depth: {info['depth']}")
    if info["fallbacks"]:
        note(f"{len(info['fallbacks'])} field(s) solved at first order after a second-order failure")
    t = picks.time_s * 1e3
    print(f"wrote {len(picks)} picks from {info['n_shots']} shots to {args.out} "
          f"(times {t.min():.2f} to {t.max():.2f} ms, noise {args.noise_ms:g} ms)")
    if info["records"]:
        print(f"wrote {len(info['records'])} SEG-Y shot records to {args.records}")
    return 0
