"""Write the expected --json outputs of the per-person and per-family commands on the demo.

Run from the worktree root: ``python tests/data/expected/regenerate.py``. Run it only with code
whose output is known to be right (the files pin that output; tests/test_output_unchanged.py
compares every later version with them).
"""

from __future__ import annotations

import json
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1].parent))

from output_cases import EXPECTED, build_demo, cases, env_clean, run_case  # noqa: E402


def main() -> None:
    env_clean()
    with tempfile.TemporaryDirectory() as tmp:
        db = str(Path(tmp) / "demo.sqlite")
        build_demo(db)
        for old in EXPECTED.glob("*.json"):
            old.unlink()
        for name, args in cases().items():
            code, data = run_case(args, db, Path(tmp) / "out")
            path = EXPECTED / f"{name}.json"
            path.write_text(json.dumps({"args": args, "exit_code": code, "output": data}, sort_keys=True,
                                       ensure_ascii=False) + "\n")  # fmt: skip
            print(name, code)


if __name__ == "__main__":
    main()
