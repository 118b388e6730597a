"""The report names what it was made from (files and columns) under its title.

A page passed on without its command line must still say which file, score column, labels and
weights it read. Data: scikit-learn's bundled breast-cancer set (Wolberg, Street & Mangasarian
1995; malignant = 1), scored by a LogisticRegression fitted on other rows.
"""

from __future__ import annotations

import html

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from probwrap.cli import main
from probwrap.report import build_report

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    idx = np.random.default_rng(0).permutation(y.shape[0])
    fit, held, later = idx[:250], idx[250:450], idx[450:]
    model = LogisticRegression(max_iter=5000).fit(X[fit, :5], y[fit])
    d = tmp_path_factory.mktemp("made_from")
    pd.DataFrame({"risk score": model.predict_proba(X[held, :5])[:, 1], "outcome": y[held],
                  "w": np.where(np.arange(held.size) % 2, 1.0, 2.0)}
                 ).to_csv(d / "held out.csv", index=False)
    pd.DataFrame({"risk score": model.predict_proba(X[later, :5])[:, 1]}
                 ).to_csv(d / "new.csv", index=False)
    return d


def test_cli_page_names_its_files_and_columns(files, capsys):
    out = files / "r.html"
    code = main(["report", "--scores", str(files / "held out.csv"), "--score-column",
                 "risk score", "--label-column", "outcome", "--weight-column", "w",
                 "--unlabelled", str(files / "new.csv"), "--cost-fp", "1", "--cost-fn", "5",
                 "--resamples", "20", "--out", str(out)])
    capsys.readouterr()
    assert code == 0
    page = out.read_text(encoding="utf-8")
    start = page.index('id="made-from"')
    line = html.unescape(page[start:page.index("</p>", start)])
    for piece in (str(files / "held out.csv"), "scores 'risk score'", "labels 'outcome'",
                  "weights 'w'", f"unlabelled rows from {files / 'new.csv'}"):
        assert piece in line, line
    # it sits in the header, right under the title
    assert page.index("<h1>") < start < page.index("</header>")


def test_library_page_has_the_line_only_when_given(files):
    frame = pd.read_csv(files / "held out.csv")
    y, p = frame["outcome"].to_numpy(), frame["risk score"].to_numpy()
    content, page = build_report(y_true=y, y_prob=p, n_resamples=10)
    assert content.source is None and 'id="made-from"' not in page
    content, page = build_report(y_true=y, y_prob=p, n_resamples=10,
                                 source="claims.csv <2025>")
    assert content.source == "claims.csv <2025>"
    assert "Made from claims.csv &lt;2025&gt;</p>" in page  # escaped like every text
    with pytest.raises(TypeError, match="source must be a str"):
        build_report(y_true=y, y_prob=p, n_resamples=10, source=["claims.csv"])
