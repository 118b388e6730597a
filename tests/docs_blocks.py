"""Code blocks of README.md and docs/*.md: the parser and the input files the docs name.

Standard library only at import time, so ``.ci/run`` can use it before any environment exists::

    python3 tests/docs_blocks.py fresh-venv quickstart   # the README's marked install commands
    python3 tests/docs_blocks.py readme-commands         # the README's other command blocks
    python tests/docs_blocks.py inputs DIR               # write the input files (needs pandas)

The rules the blocks follow are in tests/test_docs_code_blocks.py.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path
from typing import NamedTuple

ROOT = Path(__file__).resolve().parents[1]
DOC_FILES = [ROOT / "README.md", *sorted((ROOT / "docs").glob("*.md"))]

PYTHON = {"python", "py", "python3"}
SHELL = {"bash", "sh", "shell"}
_FENCE = re.compile(r"^(?P<indent> {0,3})(?P<fence>`{3,}|~{3,})(?P<info>.*)$")
_MARKER = re.compile(r"^<!--\s*(?P<kind>not-run|known-failure|fresh-venv)\s*:\s*(?P<reason>.*?)\s*-->$")


class Block(NamedTuple):
    path: Path
    line: int  # 1-based line of the opening fence
    language: str
    code: str
    marker: str | None  # "not-run", "known-failure", "fresh-venv" or None
    reason: str

    @property
    def name(self) -> str:
        return f"{self.path.relative_to(ROOT)}:{self.line}"


def parse_blocks(path: Path) -> list[Block]:
    """Fenced blocks of a Markdown file with the marker comment just before each."""
    lines = path.read_text(encoding="utf-8").splitlines()
    blocks: list[Block] = []
    i = 0
    while i < len(lines):
        m = _FENCE.match(lines[i])
        if not m:
            i += 1
            continue
        fence, info = m["fence"], m["info"].strip()
        start = i
        body = []
        i += 1
        while i < len(lines) and not lines[i].strip().startswith(fence):
            body.append(lines[i])
            i += 1
        i += 1  # closing fence
        language = info.split()[0].lower() if info else ""
        marker, reason = None, ""
        j = start - 1
        while j >= 0 and not lines[j].strip():
            j -= 1
        if j >= 0:
            mm = _MARKER.match(lines[j].strip())
            if mm:
                marker, reason = mm["kind"], mm["reason"]
        blocks.append(Block(path, start + 1, language, "\n".join(body) + "\n", marker, reason))
    return blocks


ALL_BLOCKS = [b for p in DOC_FILES for b in parse_blocks(p)]
CODE_BLOCKS = [b for b in ALL_BLOCKS if b.language in PYTHON | SHELL]


def fresh_venv_blocks(kind: str) -> list[Block]:
    return [b for b in ALL_BLOCKS if b.marker == "fresh-venv" and b.reason == kind]


# ---------------------------------------------------------------- input files named by the docs
def _scored(n_outcomes: int):
    """A logistic model fitted on invented summer parcels (demo data, not a check value)."""
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap.datasets import make_parcels

    train = make_parcels(4000, n_outcomes=n_outcomes, random_state=10)
    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(train.data, train.target)
    return model, make_parcels


def _binary_labelled(n, season, seed, text_labels=False):
    model, make = _scored(2)
    s = make(n, season=season, random_state=seed)
    import numpy as np
    import pandas as pd

    labels = np.where(s.target == 1, "yes", "no") if text_labels else s.target
    size = np.select([s.data[:, 0] < 1.5, s.data[:, 0] < 6.0], ["light", "medium"], "heavy")
    return pd.DataFrame({"risk": model.predict_proba(s.data)[:, 1], "damaged": labels,
                         "size": size})


def _three_way(n, season, seed, labelled):
    model, make = _scored(3)
    s = make(n, n_outcomes=3, season=season, random_state=seed)
    import pandas as pd

    frame = pd.DataFrame(model.predict_proba(s.data), columns=s.target_names)
    if labelled:
        frame["outcome"] = [s.target_names[k] for k in s.target]
    return frame


def _late_labelled(n, seed):
    """Parcels shipped over the last 60 days; damage claims arrive ~12 days after shipping."""
    import numpy as np
    import pandas as pd

    model, make = _scored(2)
    s = make(n, random_state=seed)
    rng = np.random.default_rng(seed)
    since = rng.uniform(0, 60, n)
    delay = rng.exponential(12.0, n)
    claimed = (s.target == 1) & (delay <= since)
    return pd.DataFrame({"risk": model.predict_proba(s.data)[:, 1],
                         "days": np.round(np.where(claimed, delay, since), 2),
                         "claimed": claimed.astype(int)})


INPUT_FILES = {
    # labelled held-out scores of the summer model: probabilities in "risk"; "damaged" holds
    # yes / no in heldout.csv (the README shows --positive-label) and 0 / 1 in scores.csv
    "heldout.csv": lambda: _binary_labelled(3000, "summer", 11, text_labels=True),
    "scores.csv": lambda: _binary_labelled(3000, "summer", 11),
    # new, unlabelled scores: today's summer parcels, and a winter week (damage roughly doubles)
    "today.parquet": lambda: _binary_labelled(2000, "summer", 12)[["risk"]],
    "this-week.csv": lambda: _binary_labelled(2000, "winter", 13)[["risk"]],
    "winter.csv": lambda: _binary_labelled(2000, "winter", 13)[["risk"]],
    # three outcomes: one probability column per class, labels by class name
    "three.csv": lambda: _three_way(3000, "summer", 14, labelled=True),
    "winter3.csv": lambda: _three_way(2000, "winter", 15, labelled=False),
    # late labels: "days" observed so far (until the claim, or until today), "claimed" 1/0
    "claims.csv": lambda: _late_labelled(4000, 16),
}


def write_input_files(folder: Path) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    for name, make in INPUT_FILES.items():
        frame = make()
        if name.endswith(".parquet"):
            frame.to_parquet(folder / name, index=False)
        else:
            frame.to_csv(folder / name, index=False)


def _main(argv: list[str]) -> int:
    """``fresh-venv KIND``: print the README's marked install commands; ``inputs DIR``: write
    the input files the docs name into DIR (both used by .ci/run)."""
    if len(argv) == 2 and argv[0] == "fresh-venv":
        blocks = fresh_venv_blocks(argv[1])
        if not blocks:
            print(f"no README block marked fresh-venv: {argv[1]}", file=sys.stderr)
            return 1
        print("".join(b.code for b in blocks), end="")
        return 0
    if len(argv) == 2 and argv[0] == "inputs":
        write_input_files(Path(argv[1]))
        return 0
    if len(argv) == 1 and argv[0] == "readme-commands":
        # the README's other command blocks, for the fresh environment of the quickstart
        blocks = [b for b in CODE_BLOCKS if b.path.name == "README.md" and b.language in SHELL
                  and b.marker is None]
        print("\n".join(b.code for b in blocks), end="")
        return 0
    print(_main.__doc__, file=sys.stderr)
    return 2


if __name__ == "__main__":
    sys.exit(_main(sys.argv[1:]))
