"""Rewrite the generated tables in README.md (options, result fields, codes).

Run after changing config.py, schema.py or flags.py:  .venv/bin/python tests/update_readme.py
tests/test_run_batch.py fails while the README and the code disagree.
"""

import re
from pathlib import Path

from reachgauge import config, flags
from reachgauge.results import schema

README = Path(__file__).resolve().parents[1] / "README.md"
BLOCKS = {"options": config.markdown, "fields": schema.markdown, "codes": flags.markdown}


def render(text: str) -> str:
    for name, make in BLOCKS.items():
        pattern = re.compile(rf"(<!-- {name}:start -->\n).*?(<!-- {name}:end -->)", re.S)
        if not pattern.search(text):
            raise SystemExit(f"README.md lacks the markers <!-- {name}:start/end -->")
        text = pattern.sub(lambda m: m.group(1) + make() + m.group(2), text)
    return text


if __name__ == "__main__":
    README.write_text(render(README.read_text()))
    print(f"updated {README}")
