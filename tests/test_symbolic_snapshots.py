"""Derivation regression: derived expressions against the stored canonical text.

A deliberate change to the derivation refreshes the snapshots with
``python -m kit.symbolic.snapshots --refresh`` in the same commit, with the reason.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from kit.symbolic.snapshots import SNAPSHOT_STRUCTURES, main, snapshot_path, snapshot_text

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.parametrize("structure", SNAPSHOT_STRUCTURES, ids=lambda s: s.key)
def test_derivation_matches_snapshot(structure):
    stored = snapshot_path(structure).read_text(encoding="utf-8")
    assert snapshot_text(structure) == stored, (
        f"derivation of {structure.key} changed; if deliberate, run "
        "`python -m kit.symbolic.snapshots --refresh` and give the reason in the commit"
    )


def test_snapshot_text_is_independent_of_hash_seed():
    code = (
        "from kit.symbolic.snapshots import snapshot_text\n"
        "from kit.symbolic import Structure\n"
        "import sys; sys.stdout.write(snapshot_text(Structure(3, True)))\n"
    )
    outs = []
    for seed in ("1", "2"):
        env = dict(os.environ, PYTHONHASHSEED=seed)
        outs.append(subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, check=True,
                                   capture_output=True, text=True).stdout)
    assert outs[0] == outs[1]


def test_snapshot_command_refreshes_and_compares(tmp_path, capsys):
    assert main(["--dir", str(tmp_path)]) == 1  # nothing stored yet: differs
    assert main(["--dir", str(tmp_path), "--refresh"]) == 0
    assert main(["--dir", str(tmp_path)]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        f"{s.key}.txt" for s in SNAPSHOT_STRUCTURES
    )
    capsys.readouterr()
