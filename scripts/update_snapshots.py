"""Regenerate tests/stages/snapshots/*.json: `drivelint stages --all --format json` per example.

Review the diff before committing; never edit a snapshot by hand.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))


def snapshot(example: Path) -> str:
    import os

    from drivelint.pipeline import load_stages
    from drivelint.stages.recognise import stages_json

    os.chdir(ROOT)
    _, stages = load_stages(example.relative_to(ROOT))
    return json.dumps(stages_json(stages), indent=2, sort_keys=True) + "\n"


def main() -> None:
    target = ROOT / "tests" / "stages" / "snapshots"
    target.mkdir(parents=True, exist_ok=True)
    for example in sorted((ROOT / "examples").glob("*.cir")):
        (target / (example.stem + ".json")).write_text(snapshot(example), encoding="utf-8")
        print(f"wrote {example.stem}.json")


if __name__ == "__main__":
    main()
