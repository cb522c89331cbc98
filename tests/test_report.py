"""Charts, pictures and the HTML report: contents checked against a published example."""

from __future__ import annotations

import base64
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote

import matplotlib.image as mpimg
import numpy as np
import pytest
import pyvista as pv

import spaceframe as sf
from spaceframe.results.summary import format_number
from spaceframe.run import report

pv.OFF_SCREEN = True

# Ferreira, MATLAB Codes for Finite Element Analysis (Springer 2010) §5.3,
# four-bar space truss (the `ferreira` fixture): u1 = (-0.3024, -1.5177,
# 0.2688) mm, reaction R4 = (0, 7968.1, 0) N at the foot reached only by the
# member along y, which therefore carries N = -7968.1 N.
PUBLISHED_U1_MM = np.array([-0.3024, -1.5177, 0.2688])
PUBLISHED_N_MAX_COMPRESSION = -7968.1


def _heal_report() -> object:
    """A real healing report: two line ends 0.4 mm apart are merged (tolerance 1 mm)."""
    from spaceframe.geometry import heal

    nodes = np.array([[0.0, 0, 0], [1, 0, 0], [1.0004, 0, 0], [2, 0, 0]])
    return heal(nodes, np.array([[0, 1], [2, 3]])).report


@pytest.fixture
def results(ferreira: sf.Model) -> sf.Results:
    ferreira.add_group("legs", [0, 1, 3])
    ferreira.add_group("strut", [2])
    ferreira.add_load("Q", [0], (2e3, 0.0, 1e3))
    ferreira.add_combination("ULS", {"P": 1.35, "Q": 1.5})
    ferreira.meta["heal:report"] = _heal_report()
    ferreira.meta["units"] = {"name": "mm", "scale": 1e-3}
    return ferreira.solve()


class _Links(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.refs: list[str] = []
        self.tags: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        self.refs += [v for k, v in attrs if k in ("src", "href") and v is not None]


def _links(html: str) -> _Links:
    parser = _Links()
    parser.feed(html)
    return parser


def test_report_holds_the_figures_of_the_run(tmp_path: Path, results: sf.Results) -> None:
    path = report.write_report(tmp_path / "report.html", results, title="Fictional footbridge",
                               job={"project": "Riverside footbridge (demo)"})
    text = path.read_text(encoding="utf-8")
    u_mm = np.linalg.norm(PUBLISHED_U1_MM)
    # Published to four figures, so the report's four figures must agree.
    assert f"<td>{format_number(u_mm)}</td>" in text
    assert f"<td>{format_number(PUBLISHED_N_MAX_COMPRESSION / 1e3)}</td>" in text
    assert report.CAUTION in text and text.count(report.CAUTION) == 2
    assert "Fictional footbridge" in text and "Riverside footbridge (demo)" in text
    for heading in ("Model", "Loads", "Model healing", "Results summary", "Equilibrium check",
                    "Critical members", "Warnings"):
        assert f"<h2>{heading}</h2>" in text
    # Applied load totals: P is -10 kN along y (published example), Q as defined above.
    assert "<td>-10.00</td>" in text
    assert "1.350 x P + 1.500 x Q" in text
    # One node merged away, located in the report's one length unit: the model
    # has no model file, so metres, as every other length (not the drawing's mm).
    assert 'merge_nodes</td><td>1</td>' in text and "(1, 0, 0)" in text
    assert "split_crossings</td><td>skipped</td>" in text
    assert "locations in m)" in text and "locations in mm" not in text
    assert "size (bounding-box diagonal) [m]" in text
    assert ">strut</td>" in text and ">legs</td>" in text


def test_summary_figures_in_report_match_summary(tmp_path: Path, results: sf.Results) -> None:
    s = report.summary(results)
    text = report.write_report(tmp_path / "r.html", results).read_text(encoding="utf-8")
    for r in s["results"].values():
        assert f"<td>{format_number(r['max_displacement']['value'] * 1e3)}</td>" in text
        assert f"<td>{r['residual']:.2e}</td>" in text
    assert text.count("<td>OK</td>") == 3


def test_report_references_only_files_it_ships(tmp_path: Path, results: sf.Results) -> None:
    charts = report.write_charts(tmp_path / "charts", results, cases=["P"], top=3)
    assert [p.name for p in charts] == ["P_members.png", "P_groups.png"]
    pictures = report.write_pictures(tmp_path / "pictures", results, views=("iso",),
                                     cases=["ULS"], size=(400, 300))
    assert [p.name for p in pictures] == ["ULS_iso.png"]
    path = report.write_report(tmp_path / "report.html", results, pictures=pictures,
                               charts=charts, embed_images=False)
    links = _links(path.read_text(encoding="utf-8"))
    assert len(links.refs) == 3
    for ref in links.refs:
        assert "://" not in ref and not ref.startswith("//")
        assert (tmp_path / unquote(ref)).is_file()
    assert "script" not in links.tags and "link" not in links.tags
    for png in [*charts, *pictures]:
        img = mpimg.imread(png)  # a second reader of the PNG files
        assert img.std() > 0


def test_embedded_images_are_pngs(tmp_path: Path, results: sf.Results) -> None:
    charts = report.write_charts(tmp_path / "charts", results, cases=["Q"])
    path = report.write_report(tmp_path / "out" / "single.html", results, charts=charts,
                               embed_images=True)
    refs = _links(path.read_text(encoding="utf-8")).refs
    assert len(refs) == 2
    for ref in refs:
        head, data = ref.split(",", 1)
        assert head == "data:image/png;base64"
        assert base64.b64decode(data)[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec)


def test_warnings_listed_and_escaped(tmp_path: Path, results: sf.Results) -> None:
    text = report.write_report(tmp_path / "w.html", results,
                               warnings=["model in 2 parts", "<b>loose</b> node 7"]
                               ).read_text(encoding="utf-8")
    assert "<li>model in 2 parts</li>" in text
    assert "&lt;b&gt;loose&lt;/b&gt; node 7" in text and "<b>loose</b>" not in text


def test_missing_picture_writes_nothing(tmp_path: Path, results: sf.Results) -> None:
    with pytest.raises(sf.ReadError, match=r"missing\.png"):
        report.write_report(tmp_path / "r.html", results, pictures=[tmp_path / "missing.png"])
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(sf.ModelError, match="no load cases"):
        report.write_report(tmp_path / "r.html", sf.Results(results.model, {}))


def test_charts_show_tension_and_compression_bars(tmp_path: Path, results: sf.Results) -> None:
    bars = report.write_charts(tmp_path, results, cases=["ULS"])[0]
    img = (mpimg.imread(bars)[..., :3] * 255).astype(int)
    r, g, b = img[..., 0], img[..., 1], img[..., 2]
    # The combination has both signs (closed form: superposition of P and Q,
    # whose forces are those of the published example and of Q alone).
    forces = results["ULS"].axial_forces
    assert forces.max() > 0 > forces.min()
    assert np.count_nonzero((r - g > 80) & (r - b > 80)) > 50  # tension bars, #c8281e
    assert np.count_nonzero((b - r > 80) & (b - g > 60)) > 50  # compression bars, #2a4fbf


def test_report_is_one_file_by_default(tmp_path: Path, results: sf.Results) -> None:
    charts = report.write_charts(tmp_path / "pictures", results, cases=["P"])
    pictures = report.write_pictures(tmp_path / "pictures", results, views=("top",),
                                     cases=["ULS"], size=(400, 300))
    path = report.write_report(tmp_path / "report.html", results, pictures=pictures,
                               charts=charts)
    refs = _links(path.read_text(encoding="utf-8")).refs
    assert len(refs) == 3
    assert all(ref.startswith("data:image/png;base64,") for ref in refs)
    # Still readable with the picture folder gone: nothing is linked.
    for f in (tmp_path / "pictures").iterdir():
        f.unlink()
    for ref in refs:
        assert base64.b64decode(ref.split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"


def test_report_uses_the_model_files_length_unit(tmp_path: Path, results: sf.Results) -> None:
    results.model.meta["project:length_unit"] = {"name": "mm", "scale": 1e-3}
    text = report.write_report(tmp_path / "r.html", results).read_text(encoding="utf-8")
    # Healing location x = 1 m = 1000 mm, and every other length in mm too.
    assert "(1000, 0, 0)" in text and "locations in mm)" in text
    assert "size (bounding-box diagonal) [mm]" in text and "at (x, y, z) [mm]" in text
    assert "[m]" not in text
    size_mm = format_number(results.model.size * 1e3)
    assert f"<td>{size_mm}</td>" in text


def _free_triangle() -> sf.Results:
    """A fictional triangle of 4 m sides on a statically determinate support layout
    (node 0 held, node 1 free along x, node 2 free in plan), warmed by 30 K."""
    m = sf.Model()
    m.add_nodes([[0.0, 0, 0], [4.0, 0, 0], [2.0, 2.0 * np.sqrt(3.0), 0]])
    m.add_members([[0, 1], [1, 2], [2, 0]], area=1e-3, E=2.1e11, alpha=1.2e-5)
    m.add_support([0])
    m.add_support([1], x=False)
    m.add_support([2], x=False, y=False)
    m.add_temperature("warm", [0, 1, 2], 30.0)
    return m.solve()


def test_charts_of_a_force_free_case_say_so(tmp_path: Path) -> None:
    res = _free_triangle()
    # A statically determinate frame expands freely under a uniform temperature
    # change and carries no force (common practice: no redundant member resists
    # the expansion); the solve leaves round-off.  Scale: EA alpha dT, closed form.
    ea_alpha_dt = 2.1e11 * 1e-3 * 1.2e-5 * 30.0
    assert report.force_scale(res) == pytest.approx(ea_alpha_dt, rel=1e-9)
    assert np.abs(res["warm"].axial_forces).max() < 1e-6 * ea_alpha_dt
    bars, hist = report.write_charts(tmp_path, res)
    for png in (bars, hist):
        img = (mpimg.imread(png)[..., :3] * 255).astype(int)
        r, g, b = img[..., 0], img[..., 1], img[..., 2]
        assert np.count_nonzero((r - g > 80) & (r - b > 80)) == 0  # no tension bars
        assert np.count_nonzero((b - r > 80) & (b - g > 60)) == 0  # no compression bars


def test_no_force_chart_text(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from matplotlib.figure import Figure

    titles: list[str] = []
    texts: list[str] = []
    real = Figure.savefig

    def spy(fig: Figure, *args: object, **kwargs: object) -> None:
        ax = fig.axes[0]
        titles.append(ax.get_title())
        texts.extend(t.get_text() for t in ax.texts)
        real(fig, *args, **kwargs)

    monkeypatch.setattr(Figure, "savefig", spy)
    report.write_charts(tmp_path, _free_triangle())
    assert titles == ["warm: no member force"] * 2
    assert all(t.startswith("no member force (every |N| <= ") for t in texts) and texts


@pytest.mark.slow
def test_run_pictures_default_to_combinations_and_envelopes(tmp_path: Path) -> None:
    from spaceframe import demos
    from spaceframe.run import job

    files = demos.write_demo(tmp_path / "canopy", "canopy")
    toml = next(f for f in files if f.suffix == ".toml")
    phases: list[str] = []
    out = job.run(toml, tmp_path / "out", progress=phases.append)
    pics = sorted(p.name for p in (out.output / "pictures").glob("*_iso.png"))
    # Three combinations and the envelope "ULS"; no picture of a bare load case.
    assert pics == ["SLS_snow_iso.png", "ULS_iso.png", "ULS_snow_iso.png", "ULS_uplift_iso.png"]
    counts = [p for p in phases if p.startswith("pictures ")]
    assert counts == [f"pictures {k}/12" for k in range(1, 13)]
    refs = _links((out.output / "report.html").read_text(encoding="utf-8")).refs
    assert refs and all(r.startswith("data:image/png;base64,") for r in refs)
    # A choice by name, and none at all.
    out2 = job.run(toml, tmp_path / "out2", pictures="snow")
    assert sorted(p.name for p in (out2.output / "pictures").glob("*.png")) == [
        "snow_front.png", "snow_groups.png", "snow_iso.png", "snow_members.png",
        "snow_top.png"]
    with pytest.raises(sf.ModelError, match="no result named 'rain'"):
        job.run(toml, tmp_path / "out3", pictures="rain")
    assert not (tmp_path / "out3").exists()


def test_cases_whose_names_differ_only_in_dropped_characters_get_their_own_charts(
    tmp_path: Path,
) -> None:
    # "heat x" and "heat_x" make the same safe file name; each must keep its own chart.
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [2, 0, 0], [1, 0, 1.5]])
    m.add_members([[0, 2], [1, 2], [0, 1]], area=1e-3, E=210e9, alpha=12e-6)
    m.add_support([0, 1])
    m.add_support([2], x=False, z=False)
    m.add_load("heat x", 2, (0.0, 0.0, -1e3))
    m.add_load("heat_x", 2, (0.0, 0.0, -2e3))
    res = m.solve()
    charts = report.write_charts(tmp_path, res, cases=["heat x", "heat_x"])
    names = [p.name for p in charts]
    assert len(names) == 4 and len(set(n.lower() for n in names)) == 4
    assert all(p.is_file() for p in charts)
