"""``fitdrag calibrate-lens``: a lens model (camera matrix + distortion) from checkerboards."""

from __future__ import annotations

import argparse
from pathlib import Path

from fitdrag.errors import OutputExistsError

NAME = "calibrate-lens"

EXAMPLE = """\
Examples:
  fitdrag calibrate-lens board/*.png --board 9x6 --square 0.025 -o lens.json
  fitdrag calibrate-lens board_folder/ --board 7x5 --square 0.030 --fix-k3 -o lens.json

Take 10-20 pictures of a flat printed checkerboard with the camera, lens, focus and
resolution used for the footage: the board at different places (fill the frame's corners in
some views, where distortion is strongest) and tilted up to about 45 degrees. --board counts
the inner corners (a board of 10 x 7 squares has 9x6). Then pass the file to
`fitdrag track --lens lens.json`.

Exit codes: 0 lens file written, 1 a bug (with a traceback), 2 bad arguments or pictures
(too few boards found, an existing lens file without --force).
"""


def register(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        NAME,
        help="measure lens distortion from checkerboard pictures",
        description="Estimate the camera matrix and the radial-tangential lens distortion "
        "(k1, k2, p1, p2, k3) from pictures of a flat checkerboard and write them as a lens "
        "file (JSON) for `fitdrag track --lens`.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("images", nargs="+", metavar="IMAGES",
                   help="checkerboard pictures (files, or folders of PNG/TIFF/JPEG/BMP)")  # fmt: skip
    p.add_argument("--board", required=True, metavar="COLSxROWS",
                   help="inner corners per row x per column, e.g. 9x6")  # fmt: skip
    p.add_argument("--square", required=True, type=float, metavar="M",
                   help="side of one board square [m]")  # fmt: skip
    p.add_argument("-o", "--output", required=True, metavar="LENS.json", help="lens file to write")
    p.add_argument("--fix-k3", action="store_true",
                   help="hold the third radial coefficient at zero (few views, mild lens)")  # fmt: skip
    p.add_argument("--force", action="store_true", help="overwrite an existing lens file")
    return p


def run(args) -> int:
    from fitdrag.video.lens import board_images_from, calibrate_lens, parse_board

    out = Path(args.output)
    if out.exists() and not args.force:
        raise OutputExistsError(f"-o/--output: {out} exists; pass --force to overwrite it.")
    board = parse_board(args.board)
    files = board_images_from(args.images)
    lens = calibrate_lens(files, board, args.square, fix_k3=args.fix_k3)
    lens.save(out, force=args.force)
    k = lens.camera_matrix
    d = lens.dist_coeffs
    sd = lens.details.get("std_dev", {})
    rejected = lens.details.get("rejected", ())
    print(f"lens: {lens.n_views} of {len(files)} view(s) used; reprojection RMS {lens.rms:.3g} px")
    if rejected:
        print(f"  board not found in: {', '.join(Path(r).name for r in rejected)}")
    print(
        f"  fx {k[0, 0]:.2f} ± {sd.get('fx_px', 0):.2g} px, fy {k[1, 1]:.2f} ± "
        f"{sd.get('fy_px', 0):.2g} px, cx {k[0, 2]:.2f}, cy {k[1, 2]:.2f} px "
        f"(image {lens.image_size[0]}x{lens.image_size[1]})"
    )
    print("  distortion k1 {:.5g}, k2 {:.5g}, p1 {:.3g}, p2 {:.3g}, k3 {:.5g}".format(*d[:5]))
    worst = max(lens.details.get("per_view_rms_px", {}).items(), key=lambda kv: kv[1],
                default=None)  # fmt: skip
    if worst is not None and worst[1] > 3 * lens.rms and worst[1] > 0.5:
        print(f"  note: {Path(worst[0]).name} fits badly ({worst[1]:.2g} px); consider dropping it")
    print(f"wrote {out}")
    return 0
