"""Fit pictures: byte-reproducible PNGs, ± band, reference overlay, the plot command."""

from __future__ import annotations

import dataclasses
import io
import struct
import sys

import numpy as np
import pytest

pytest.importorskip("matplotlib")

from pipeline import plots  # noqa: E402
from pipeline.cli import main  # noqa: E402
from pipeline.settings import Settings  # noqa: E402
from pipeline.species import ReferenceData, parse_species  # noqa: E402
from refdata import SPECIES_DIR, reference, reference_cp, reference_s  # noqa: E402

# colours of the page (matplotlib's tab10): band = tab:orange at alpha 0.35 on white,
# reference points = tab:red
BAND_RGB = (1.0, 1 - 0.35 * (1 - 0x7F / 255), 1 - 0.35 * (1 - 0x0E / 255))
RED_RGB = (0xD6 / 255, 0x27 / 255, 0x28 / 255)


def _chunks(png: bytes) -> list[bytes]:
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    out, i = [], 8
    while i < len(png):
        (n,) = struct.unpack(">I", png[i:i + 4])
        out.append(png[i + 4:i + 8])
        i += 12 + n
    return out


def _pixels(png: bytes, rgb, tol=0.02) -> int:
    import matplotlib.image

    img = matplotlib.image.imread(io.BytesIO(png), format="png")[..., :3]
    return int(np.all(np.abs(img - np.asarray(rgb)) < tol, axis=-1).sum())


def _uncertain(sp):
    # scale-factor uncertainty 0.03: magnitude reported by Irikura, Johnson & Kacker,
    # J. Phys. Chem. A 109, 8430 (2005) (from memory); 2 % on B: common practice
    return dataclasses.replace(sp, frequency_scale_uncertainty=0.03, rotor_uncertainty=0.02)


def test_page_is_byte_reproducible_and_has_no_metadata(database):
    a = plots.species_page(database["HO2"], Settings())
    b = plots.species_page(database["HO2"], Settings())
    assert a == b
    chunks = _chunks(a)
    assert not {b"tEXt", b"iTXt", b"zTXt", b"tIME"} & set(chunks), chunks


def test_band_drawn_only_with_uncertainties(database):
    plain = dataclasses.replace(database["H2O"], formation_uncertainty=None)
    assert _pixels(plots.species_page(plain, Settings()), BAND_RGB) == 0
    assert _pixels(plots.species_page(_uncertain(plain), Settings()), BAND_RGB) > 500


def test_reference_points_overlaid(database):
    T = (300.0, 500.0, 1000.0, 1500.0, 2000.0, 3000.0)
    _, source = reference("H2O")
    ref = ReferenceData(f"GRI-Mech 3.0 thermo ({source}, as shipped with cantera)", T,
                        tuple(reference_cp("H2O", T)), tuple(reference_s("H2O", T)))
    without = plots.species_page(database["H2O"], Settings())
    with_ref = plots.species_page(database["H2O"], Settings(), ref)
    assert _pixels(without, RED_RGB, 0.05) == 0
    assert _pixels(with_ref, RED_RGB, 0.05) > 50


def test_reference_block_in_species_file(database):
    text = (SPECIES_DIR / "OH.yaml").read_text()
    text += ("reference:\n  source: \"GRI-Mech 3.0 thermo as shipped with cantera\"\n"
             f"  T: [300, 1000]\n  cp: [{reference_cp('OH', 300)[0]:.4f}, {reference_cp('OH', 1000)[0]:.4f}]\n")
    sp, _ = parse_species(text.encode(), "OH.yaml")
    assert sp.reference.T == (300.0, 1000.0) and sp.reference.s is None
    assert _pixels(plots.species_page(sp, Settings()), RED_RGB, 0.05) > 10


def test_reference_block_errors():
    from pipeline.diagnostics import InputError

    text = (SPECIES_DIR / "OH.yaml").read_text() + "reference:\n  source: x\n  T: [300, 1000]\n  cp: [29.9]\n"
    with pytest.raises(InputError) as exc:
        parse_species(text.encode(), "OH.yaml")
    d = exc.value.diagnostics[0]
    assert d.key == "reference.cp" and "1 value(s) for 2" in d.message


def test_comparison_page(database):
    from pipeline.fit import fit_options, fit_table
    from pipeline.thermo import temperature_grid, thermo_table

    T = temperature_grid(200, 6000, 10)
    old_sp = database["CO2"]
    new_sp = dataclasses.replace(old_sp, frequencies=tuple(f * 1.02 for f in old_sp.frequencies))
    fits = [fit_table(thermo_table(s, T), **fit_options(s, Settings())) for s in (old_sp, new_sp)]
    a = plots.render_comparison("CO2", T, *fits)
    assert a == plots.render_comparison("CO2", T, *fits)
    assert a != plots.render_comparison("CO2", T, fits[0], fits[0])
    assert plots.render_comparison("CO2", T, None, fits[1])[:8] == b"\x89PNG\r\n\x1a\n"


def test_plot_command_writes_one_file(tmp_path, capsys):
    out = tmp_path / "OH.png"
    assert main(["plot", "OH", "--species", str(SPECIES_DIR), "-o", str(out)]) == 0
    first = out.read_bytes()
    assert main(["plot", "OH", "--species", str(SPECIES_DIR), "-o", str(out)]) == 0
    assert out.read_bytes() == first
    assert list(tmp_path.iterdir()) == [out]


def test_plot_command_unknown_species(capsys):
    assert main(["plot", "XYZ", "--species", str(SPECIES_DIR)]) == 1
    assert "no species named 'XYZ'" in capsys.readouterr().err


def test_without_matplotlib(monkeypatch, capsys, tmp_path):
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # import fails as if not installed
    monkeypatch.setattr(plots, "available", lambda: False)
    with pytest.raises(plots.PlotsUnavailable):
        plots._mpl()
    assert main(["plot", "OH", "--species", str(SPECIES_DIR), "-o", str(tmp_path / "x.png")]) == 1
    assert "statherm[plot]" in capsys.readouterr().err
    assert not (tmp_path / "x.png").exists()


# --------------------------------------------------------------------------
# The build: output/plots/, reproducible, only when on, only for changed species
# --------------------------------------------------------------------------

BUILD_SPECIES = ("Ar", "CO2", "HO2")


def _db(tmp_path, settings: str | None = None):
    import shutil

    species = tmp_path / "species"
    species.mkdir()
    for name in BUILD_SPECIES:
        shutil.copy2(SPECIES_DIR / f"{name}.yaml", species / f"{name}.yaml")
    if settings is not None:
        (species / "statherm.yaml").write_text(settings)
    return species


def _record_names(species) -> list[str]:
    from pipeline.species import load_database

    return sorted(f"{sp.name}.png" for sp in load_database(species)[0])


def _build(species, out, *flags):
    from buildkit import run

    return run("build", "--species", str(species), "--out", str(out), *flags)


def _links(report: str) -> list[str]:
    import re

    return [m.group(1) or m.group(2) for m in re.finditer(r"\]\(<([^>]+)>\)|\]\(([^)<]+)\)", report)]


def _plots(out):
    folder = out / "plots"
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())} if folder.is_dir() else {}


def test_build_writes_plots_only_when_on(tmp_path):
    species = _db(tmp_path)
    rc, _, err = _build(species, tmp_path / "off")
    assert rc == 0, err
    assert _plots(tmp_path / "off") == {}
    rc, _, err = _build(species, tmp_path / "on", "--plots")
    assert rc == 0, err
    assert sorted(_plots(tmp_path / "on")) == _record_names(species)


def test_two_clean_builds_give_identical_plots(tmp_path):
    species = _db(tmp_path, "plots: true\n")
    for out in ("a", "b"):
        rc, _, err = _build(species, tmp_path / out)
        assert rc == 0, err
    a, b = _plots(tmp_path / "a"), _plots(tmp_path / "b")
    assert sorted(a) == _record_names(species) and a == b
    # every species' plot is linked from the report, and every link resolves
    links = _links((tmp_path / "a" / "REPORT.md").read_text())
    assert sorted(link for link in links if link.startswith("plots/")) == [f"plots/{n}" for n in sorted(a)]
    for link in links:
        assert (tmp_path / "a" / link).is_file(), link


def test_plot_rewritten_only_for_the_changed_species(tmp_path):
    from buildkit import edit, snapshot

    species = _db(tmp_path, "plots: true\n")
    out = tmp_path / "out"
    assert _build(species, out)[0] == 0
    before = snapshot(out)
    edit(species / "CO2.yaml", "uncertainty: 0.13", "uncertainty: 0.5")
    rc, _, err = _build(species, out)
    assert rc == 0, err
    after = snapshot(out)
    moved = {rel for rel in after if after[rel] != before.get(rel)}
    assert "plots/CO2.png" in moved  # the title quotes u(G°)
    assert not {"plots/AR.png", "plots/HO2.png"} & moved
    assert {rel for rel in after if rel.startswith("plots/")} == {f"plots/{n}" for n in _record_names(species)}


def test_build_without_matplotlib_says_so_once_and_links_nothing(tmp_path, monkeypatch):
    species = _db(tmp_path, "plots: true\n")
    out = tmp_path / "out"
    with monkeypatch.context() as m:
        m.setitem(sys.modules, "matplotlib", None)
        rc, _, err = _build(species, out)
        assert rc == 0, err
        assert err.count("statherm[plot]") == 1, err
        assert _plots(out) == {}
        assert not [link for link in _links((out / "REPORT.md").read_text()) if link.startswith("plots/")]
    # with matplotlib back, the next build draws them (the cache key knows the drawing library)
    rc, _, err = _build(species, out)
    assert rc == 0, err
    assert sorted(_plots(out)) == _record_names(species)


def test_bundled_database_switches_plots_on():
    from pipeline.settings import load_settings

    assert load_settings(SPECIES_DIR).plots is True


# --------------------------------------------------------------------------
# REPORT.md: "what changed since the last build"
# --------------------------------------------------------------------------


def test_report_says_what_changed_since_the_last_build(tmp_path):
    import shutil

    from buildkit import edit, run

    from pipeline.diff import SINCE_BEGIN, strip_since_last_build

    species = _db(tmp_path, "report_changes: true\n")
    out = tmp_path / "out"
    assert _build(species, out)[0] == 0
    assert SINCE_BEGIN not in (out / "REPORT.md").read_text()  # no previous build yet
    edit(species / "CO2.yaml", "frequencies: [1333.0,", "frequencies: [1340.0,")
    rc, _, err = _build(species, out)
    assert rc == 0, err
    report = (out / "REPORT.md").read_text()
    section = report[report.index(SINCE_BEGIN):]
    section = section[:section.index("<!-- statherm: end")]
    assert "| CO2 | changed |" in section
    assert "AR" not in section and "HO2" not in section
    # a no-op rebuild leaves it; check accepts it with and without the cache
    assert _build(species, out)[0] == 0
    assert (out / "REPORT.md").read_text() == report
    assert run("check", "--species", str(species), "--out", str(out))[0] == 0
    shutil.rmtree(out / ".statherm-cache")
    rc, _, err = run("check", "--species", str(species), "--out", str(out))
    assert rc == 0, err
    # a clean build writes the same report without the section
    assert _build(species, tmp_path / "clean")[0] == 0
    assert (tmp_path / "clean" / "REPORT.md").read_text() == strip_since_last_build(report)


# --------------------------------------------------------------------------
# statherm diff --plots, statherm plot --reference
# --------------------------------------------------------------------------


def test_diff_plots_one_page_per_changed_species(tmp_path):
    from buildkit import edit, run

    species = _db(tmp_path)
    assert _build(species, tmp_path / "old")[0] == 0
    edit(species / "CO2.yaml", "frequencies: [1333.0,", "frequencies: [1340.0,")
    assert _build(species, tmp_path / "new")[0] == 0
    pages = tmp_path / "review"
    rc, out, err = run("diff", str(tmp_path / "old"), str(tmp_path / "new"), "--plots", str(pages))
    assert rc == 0, err
    assert sorted(p.name for p in pages.iterdir()) == ["CO2.png"]
    assert f"]({(pages / 'CO2.png').as_posix()})" in out
    first = (pages / "CO2.png").read_bytes()
    assert run("diff", str(tmp_path / "old"), str(tmp_path / "new"), "--plots", str(pages))[0] == 0
    assert (pages / "CO2.png").read_bytes() == first
    # identical databases: no pages, empty report
    rc, out, _ = run("diff", str(tmp_path / "old"), str(tmp_path / "old"), "--plots", str(tmp_path / "none"))
    assert (rc, out) == (0, "") and not (tmp_path / "none").exists()


def test_plot_reference_from_a_fixed_column_file(tmp_path):
    from buildkit import run

    species = _db(tmp_path)
    assert _build(species, tmp_path / "out")[0] == 0
    ref = tmp_path / "out" / "thermo.dat"  # stands in for a published file of the same layout
    with_ref, plain = tmp_path / "a.png", tmp_path / "b.png"
    assert run("plot", "HO2", "--species", str(species), "--reference", str(ref), "-o", str(with_ref))[0] == 0
    assert run("plot", "HO2", "--species", str(species), "-o", str(plain))[0] == 0
    assert _pixels(plain.read_bytes(), RED_RGB, 0.05) == 0
    assert _pixels(with_ref.read_bytes(), RED_RGB, 0.05) > 50  # mostly under the table line: same data
    lines = ref.read_text().splitlines(keepends=True)
    at = next(i for i, line in enumerate(lines) if line.startswith("HO2 "))
    other = tmp_path / "other.dat"
    other.write_text("".join(lines[:at] + lines[at + 4:]))
    rc, _, err = run("plot", "HO2", "--species", str(species), "--reference", str(other))
    assert rc == 1 and "has no record named 'HO2'" in err, err
    rc, _, err = run("plot", "HO2", "--species", str(species), "--reference", str(SPECIES_DIR / "HO2.yaml"))
    assert rc == 1 and "HO2.yaml" in err and "Traceback" not in err


def test_report_lists_species_above_the_g_uncertainty_threshold(tmp_path):
    # HO2 states u(ΔfH°) = 0.16 kJ/mol, CO2 0.13 kJ/mol, Ar 0 (their species files): with nothing
    # else stated, u(G°, 1000 K) = u(ΔfH°), so a 0.15 kJ/mol threshold flags HO2 alone
    species = _db(tmp_path, "g_uncertainty_warning: 0.15\n")
    assert _build(species, tmp_path / "out")[0] == 0
    report = (tmp_path / "out" / "REPORT.md").read_text()
    head = "## Species whose u(G°, 1000 K) exceeds 0.150 kJ/mol"
    assert head in report
    listed = report[report.index(head):].split("\n## ")[0]
    assert "`HO2`: 0.16 kJ/mol" in listed and "CO2" not in listed and "AR" not in listed
