"""Record the golden answers with the current code: ``python tests/api/golden/record.py``.

Run it only on purpose (a deliberate change of answers), and commit the answers with a
message saying which answers changed and why.
"""

from __future__ import annotations

import json
import sys
import tempfile
from pathlib import Path

from fastapi.testclient import TestClient

sys.path.insert(0, str(Path(__file__).resolve().parents[3]))

from service.app import create_app
from tests.api.golden.cases import ANSWERS, run_cases
from tests.api.golden.settings import golden_settings


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        with TestClient(create_app(golden_settings(Path(tmp)))) as client:
            answers = run_cases(client)
    ANSWERS.mkdir(exist_ok=True)
    for old in ANSWERS.glob("*.json"):
        old.unlink()
    for name, answer in answers.items():
        text = json.dumps(answer, indent=1, ensure_ascii=False) + "\n"
        (ANSWERS / f"{name}.json").write_text(text, encoding="utf-8")
    print(f"{len(answers)} answers in {ANSWERS}")


if __name__ == "__main__":
    main()
