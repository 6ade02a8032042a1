"""Tests of the ``fitdrag calibrate-lens`` command.

Independent reference: checkerboard views rendered through a known camera matrix and known
radial-tangential distortion (tests/test_video_lens.py; OpenCV's projectPoints model).
"""

from __future__ import annotations

import cv2
import pytest
from test_video_lens import D_TRUE, K_TRUE, SQUARE, board_poses, render_board_views

from fitdrag.cli import main
from fitdrag.video.lens import load_lens


@pytest.fixture(scope="module")
def board_folder(tmp_path_factory):
    d = tmp_path_factory.mktemp("board")
    for i, img in enumerate(render_board_views(board_poses(8, seed=9), ss=3, seed=1)):
        cv2.imwrite(str(d / f"view_{i:02d}.png"), img)
    (d / "notes.txt").write_text("not an image")
    return d


def test_calibrate_lens_writes_a_usable_lens_file(board_folder, tmp_path, capsys):
    """closed-form/independent: the lens file written from a folder of views holds the known
    focal length (0.5 %) and k1 (0.02); it loads with load_lens."""
    out = tmp_path / "lens.json"
    rc = main(["calibrate-lens", str(board_folder), "--board", "9x6", "--square", str(SQUARE),
               "-o", str(out)])  # fmt: skip
    text, err = capsys.readouterr()
    assert rc == 0, err
    lens = load_lens(out)
    assert lens.camera_matrix[0, 0] == pytest.approx(K_TRUE[0, 0], rel=5e-3)
    assert lens.dist_coeffs[0] == pytest.approx(D_TRUE[0], abs=0.02)
    assert lens.image_size == (640, 480)
    assert "8 of 8 view(s) used" in text
    assert f"wrote {out}" in text
    # not overwritten without --force
    rc = main(["calibrate-lens", str(board_folder), "--board", "9x6", "--square", "0.03",
               "-o", str(out)])  # fmt: skip
    assert rc == 2
    assert f"-o/--output: {out} exists; pass --force to overwrite it." in capsys.readouterr().err


def test_calibrate_lens_errors(tmp_path, capsys):
    """regression: a bad --board text and missing images are clear errors, nothing written."""
    out = tmp_path / "lens.json"
    rc = main(["calibrate-lens", str(tmp_path / "none.png"), "--board", "9by6", "--square",
               "0.03", "-o", str(out)])  # fmt: skip
    assert rc == 2
    assert "--board: expected the inner corners as COLSxROWS" in capsys.readouterr().err
    rc = main(["calibrate-lens", str(tmp_path / "none.png"), "--board", "9x6", "--square",
               "0.03", "-o", str(out)])  # fmt: skip
    assert rc == 2
    assert "board image: " in capsys.readouterr().err
    assert not out.exists()


def test_help_has_an_example(capsys):
    """regression: the help text shows an example."""
    with pytest.raises(SystemExit):
        main(["calibrate-lens", "--help"])
    assert "fitdrag calibrate-lens board/*.png --board 9x6" in capsys.readouterr().out
