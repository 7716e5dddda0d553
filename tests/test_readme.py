"""The README's promises: its demo species file is valid, CI runs its test command."""

from __future__ import annotations

import re

from refdata import ROOT
from pipeline.species import parse_species
from pipeline.thermo import thermo_table

README = (ROOT / "README.md").read_text(encoding="utf-8")


def test_demo_species_file_loads_and_computes():
    block = re.search(r"```yaml\n(.*?)```", README, re.S).group(1)
    sp, warnings = parse_species(block.encode(), "species/DEMO-C2H3O.yaml")
    assert warnings == []
    assert sp.name == "DEMO-C2H3O" and len(sp.torsions) == 1
    t = thermo_table(sp, [298.15, 1000.0])
    assert t.cp[1] > t.cp298 > 0


def test_ci_runs_the_readme_commands():
    fence = README[README.index("## Quick start"):README.index("## Caution")]
    commands = [line.split("#")[0].strip() for line in fence.splitlines() if line.startswith("python3 -m pip")]
    assert len(commands) == 2
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert commands[1] in ci  # the test command
    assert "pipeline check" in ci


def test_caution_is_stated():
    """README and the generated report carry the caution (the report is kept current by check)."""
    report = (ROOT / "output" / "REPORT.md").read_text(encoding="utf-8")
    for text in (README, report):
        assert "safety-critical" in text and "licensed engineering practice" in text
