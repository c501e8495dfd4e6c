"""``fxnet report``: one HTML file from the command line; bad input is one line and exit code 2."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from bs4 import BeautifulSoup

from fxnet_widgets.cli import main
from fxnet_widgets.core.images import read_image, save_png
from fxnet_widgets.report import WIDGET_STATE_MIME

ASSETS = Path(__file__).resolve().parents[2] / "assets"


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, str]:
    d = tmp_path_factory.mktemp("cli-report")
    img = read_image(ASSETS / "scene-test.png").codes[120:200, 240:400]
    mask = read_image(ASSETS / "scene-test-mask.png").codes[120:200, 240:400]
    save_png(d / "belt.png", img)
    save_png(d / "belt-mask.png", mask)
    np.save(d / "codes.npy", img.reshape(-1, 3)[:200])
    return {"dir": str(d), "net": str(ASSETS / "network.json"), "plan": str(ASSETS / "plan.json"),
            "img": str(d / "belt.png"), "mask": str(d / "belt-mask.png"), "npy": str(d / "codes.npy")}  # fmt: skip


def test_report_from_an_image_with_a_mask(files: dict[str, str], capsys: pytest.CaptureFixture[str]) -> None:
    out = str(Path(files["dir"], "r.html"))
    rc = main(["report", files["net"], files["plan"], files["img"], "-o", out, "--mask", files["mask"],
               "--title", "belt <3>"])  # fmt: skip
    printed = capsys.readouterr()
    assert rc == 0, printed.err
    assert printed.out.splitlines()[-1].startswith(f"wrote {out} (")
    assert "image (full resolution 160x80)" in printed.out
    soup = BeautifulSoup(Path(out).read_text(encoding="utf-8"), "html.parser")
    assert soup.title.get_text() == "belt <3>"
    assert soup.find("table", class_="confusion") is not None  # the mask gave labels
    assert json.loads(soup.find("script", type=WIDGET_STATE_MIME).get_text())["version_major"] == 2


def test_report_from_codes(files: dict[str, str], capsys: pytest.CaptureFixture[str]) -> None:
    out = str(Path(files["dir"], "codes.html"))
    assert main(["report", files["net"], files["plan"], files["npy"], "-o", out]) == 0
    assert "samples: " in capsys.readouterr().out
    soup = BeautifulSoup(Path(out).read_text(encoding="utf-8"), "html.parser")
    (row,) = [tr for tr in soup.find("table", class_="metrics").find("tbody").find_all("tr")]
    assert row.find_all("td")[1].get_text() == "200"


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["-o", "{dir}/r.txt"], "fxnet: {dir}/r.txt: the output file name must end in .html"),
        (["-o", "{dir}/r.html", "--offline", "{dir}/nowhere"],
         "fxnet report: --offline must be an existing directory, not '{dir}/nowhere'"),
        (["-o", "{dir}/r.html", "--offline", "{dir}"],
         "fxnet: offline_bundles must be a directory holding dist/embed-amd.js of @jupyter-widgets/html-manager "
         "(get it with scripts/fetch_widget_bundles.sh), not '{dir}'"),
        (["-o", "{dir}/r.html", "--mask", "{dir}/none.png"], "fxnet: {dir}/none.png: no such file"),
    ],
)  # fmt: skip
def test_bad_input_is_one_line_and_exit_2(
    files: dict[str, str], capsys: pytest.CaptureFixture[str], extra: list[str], message: str
) -> None:
    args = [a.format(dir=files["dir"]) for a in extra]
    assert main(["report", files["net"], files["plan"], files["img"], *args]) == 2
    err = capsys.readouterr().err
    assert err == message.format(dir=files["dir"]) + "\n"


def test_mask_needs_an_image(files: dict[str, str], capsys: pytest.CaptureFixture[str]) -> None:
    out = str(Path(files["dir"], "x.html"))
    assert main(["report", files["net"], files["plan"], files["npy"], "-o", out, "--mask", files["mask"]]) == 2
    assert capsys.readouterr().err == "fxnet report: --mask needs an image input, not a .npy of codes\n"
