"""Structure of the HTML report: sections, inline figures, and numbers equal to the library's."""

import html.parser

import numpy as np
import pytest

from probwrap._prior_shift import evidence_gate
from probwrap.datasets import make_parcels
from probwrap.decision import cutoff_interval, plugin_cutoff, realised_cost, search_cutoff
from probwrap.metrics import bootstrap_interval, brier_score, expected_calibration_error, log_loss
from probwrap.report import CAUTIONS, write_report
from probwrap.shift import PriorEstimator, shift_cutoff

COSTS = {"fp": 3.0, "fn": 40.0}
N_RES = 40


class _Page(html.parser.HTMLParser):
    """Collects sections, figures with their svg elements, and data-value cells by row."""

    def __init__(self):
        super().__init__()
        self.sections, self.figures, self.tags = [], [], []
        self.rows: dict[tuple[str, str], list[str]] = {}
        self.ids: dict[str, dict] = {}
        self._row = None
        self._fig = None
        self._text = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if "id" in a and not self._fig:
            self.ids[a["id"]] = a
        if tag == "section":
            self.sections.append(a.get("id"))
        if tag == "figure":
            self._fig = {"id": a.get("id"), "svg": 0, "paths": 0}
            self.figures.append(self._fig)
        if self._fig and tag == "svg":
            self._fig["svg"] += 1
            self._fig["width"] = a.get("width")
        if self._fig and tag in ("path", "use", "polyline", "line", "circle"):  # drawn marks
            self._fig["paths"] += 1
        if tag == "tr":
            key = a.get("data-metric") or a.get("data-rule") or a.get("data-item")
            self._row = key
            if key:
                self.rows[key] = []
        if tag == "td" and self._row and "data-value" in a:
            self.rows[self._row].append(a["data-value"])

    def handle_endtag(self, tag):
        if tag == "figure":
            self._fig = None
        if tag == "tr":
            self._row = None

    def handle_data(self, data):
        self._text.append(data)

    @property
    def text(self):
        return " ".join(self._text)


def _val(cell):
    return float(cell) if cell else None


@pytest.fixture(scope="module")
def scenario():
    train = make_parcels(2500, random_state=10)
    test = make_parcels(2000, random_state=11)
    winter = make_parcels(1500, season="winter", random_state=12)
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(train.data, train.target)
    p = model.predict_proba(test.data)[:, 1]
    q = model.predict_proba(winter.data)[:, 1]
    return test.target, p, q


@pytest.fixture(scope="module")
def report(scenario, tmp_path_factory):
    y, p, q = scenario
    path = tmp_path_factory.mktemp("rep") / "sub" / "report.html"
    content = write_report(path, y_true=y, y_prob=p, costs=COSTS, capacity=0.2,
                           action_names=["ship", "inspect"], unlabelled_prob=q,
                           batch_size=500, n_resamples=N_RES, random_state=0)
    page = _Page()
    text = path.read_text(encoding="utf-8")
    page.feed(text)
    return content, page, text, path


def test_sections_and_figures(report):
    _, page, text, _ = report
    assert page.sections == ["calibration", "decisions", "prevalence", "cautions"]
    ids = [f["id"] for f in page.figures]
    assert ids == ["fig-reliability", "fig-cost", "fig-decision-curve", "fig-prevalence",
                   "fig-alarm"]
    for fig in page.figures:
        assert fig["svg"] == 1 and fig["paths"] > 20, fig
    for caution in CAUTIONS:
        assert caution in page.text
    assert "human" in page.text and "regulation" in page.text


def test_self_contained(report):
    _, page, text, _ = report
    tags = {t for t, _ in page.tags}
    assert "script" not in tags and "link" not in tags and "img" not in tags
    for _, attrs in page.tags:
        assert "src" not in attrs
        href = attrs.get("href") or attrs.get("xlink:href")
        assert href is None or href.startswith("#")
    assert "@import" not in text and "url(http" not in text
    # ids are unique across the inline figures
    all_ids = [a["id"] for _, a in page.tags if "id" in a]
    assert len(all_ids) == len(set(all_ids))


def test_calibration_numbers_match_library(scenario, report):
    y, p, _ = scenario
    content, page, _, _ = report
    assert np.isclose(_val(page.rows["brier"][0]), brier_score(y, p), rtol=1e-12)
    assert np.isclose(_val(page.rows["log_loss"][0]), log_loss(y, p), rtol=1e-12)
    m = {row.key: row for row in content.metrics}
    plain = expected_calibration_error(y, p, n_bins=10)
    assert m["ece"].plain_value == plain
    assert f"{plain:.4f}" in page.text  # the plain binned value is printed in the note
    # bootstrap intervals (consistency with the library): the report draws its bootstrap seed
    # as the first randint(2**31 - 1) of RandomState(random_state), so bootstrap_interval with
    # that seed gives the very same intervals
    seed = np.random.RandomState(0).randint(2**31 - 1)
    res = bootstrap_interval(brier_score, y, p, n_resamples=N_RES, random_state=seed)
    assert _val(page.rows["brier"][1]) == res.confidence_interval.low
    assert _val(page.rows["brier"][2]) == res.confidence_interval.high
    assert _val(page.rows["slope"][1]) == m["slope"].low
    # the binned error: bias-corrected 2 s - median(s*), with the basic bootstrap interval
    # (2 s - q_high, 2 s - q_low) (Davison & Hinkley 1997, eq. 5.6), floored at 0 -- computed
    # here from the resampled values by hand
    res = bootstrap_interval(expected_calibration_error, y, p, n_resamples=N_RES,
                             random_state=seed, method="basic", n_bins=10)
    dist = res.bootstrap_distribution
    q_lo, q_hi = np.quantile(dist, [0.025, 0.975])
    value, low, high = (_val(page.rows["ece"][i]) for i in range(3))
    assert np.isclose(value, max(2 * plain - np.median(dist), 0.0), rtol=1e-12)
    assert np.isclose(low, max(2 * plain - q_hi, 0.0), rtol=1e-12, atol=1e-15)
    assert np.isclose(high, max(2 * plain - q_lo, 0.0), rtol=1e-12)
    assert low <= value <= high


def test_decision_numbers_match_library(scenario, report):
    y, p, q = scenario
    content, page, _, _ = report
    ref = search_cutoff(p, y, COSTS, capacity=0.2, score_bounds=(0, 1))
    chosen = page.rows["chosen"]
    assert _val(chosen[0]) == ref.cutoff
    assert np.isclose(_val(chosen[1]), ref.cost)
    assert np.isclose(_val(page.ids["plugin-cutoff"]["data-value"]), plugin_cutoff(COSTS))
    for key, cut in (("plugin", plugin_cutoff(COSTS)), ("half", 0.5)):
        cost = realised_cost(y, (p > cut).astype(int), costs=COSTS)
        assert np.isclose(_val(page.rows[key][1]), cost), key
        assert np.isclose(_val(page.rows[key][2]), np.mean(p > cut))
    # "ship every parcel" / "inspect every parcel": no cutoff cell value, then the cost
    assert page.rows["none"][0] == "" and page.rows["all"][0] == ""
    assert np.isclose(_val(page.rows["none"][1]), realised_cost(y, np.zeros_like(y), costs=COSTS))
    assert np.isclose(_val(page.rows["all"][1]), realised_cost(y, np.ones_like(y), costs=COSTS))
    # the chosen rule is no worse than the alternatives on these rows
    assert _val(chosen[1]) <= _val(page.rows["half"][1]) + 1e-12
    iv = page.ids["cutoff-interval"]
    ci = cutoff_interval(p, y, COSTS, capacity=0.2, score_bounds=(0, 1), n_resamples=N_RES,
                         random_state=0)
    assert float(iv["data-low"]) <= ref.cutoff <= float(iv["data-high"])
    assert abs(float(iv["data-low"]) - ci.low) < 0.05
    assert content.capacity == 0.2 and float(chosen[2]) <= 0.2


def test_prevalence_numbers_match_library(scenario, report):
    y, p, q = scenario
    content, page, _, _ = report
    assert np.isclose(_val(page.rows["source"][0]), y.mean())
    est = PriorEstimator(n_resamples=0).fit(np.column_stack([1 - p, p]), y)
    res = est.estimate(np.column_stack([1 - q, q]))
    assert np.isclose(_val(page.rows["target"][0]), res.prior[1], atol=1e-6)
    assert np.isclose(_val(page.rows["shift_pvalue"][0]), res.shift_pvalue, rtol=1e-6)
    assert _val(page.rows["target_low"][0]) < res.prior[1] < _val(page.rows["target_high"][0])
    # the cutoff moves as PriorShiftWrapper moves its predictions: to the source prevalence
    # moved adaptation_weight of the way to the estimate (its evidence gate)
    weight, _ = evidence_gate(res, 2)
    applied = y.mean() + weight * (res.prior[1] - y.mean())
    assert np.isclose(_val(page.rows["applied"][0]), applied, atol=1e-9)
    assert np.isclose(
        _val(page.rows["adapted_cutoff"][0]),
        shift_cutoff(content.chosen_cutoff, y.mean(), applied),
    )
    assert res.prior[1] > y.mean()  # winter: damage roughly doubles


def test_report_without_costs_or_unlabelled(tmp_path, scenario):
    y, p, _ = scenario
    path = tmp_path / "plain.html"
    content = write_report(path, y_true=y, y_prob=p, n_resamples=10)
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    assert page.sections == ["calibration", "decisions", "prevalence", "cautions"]
    assert [f["id"] for f in page.figures] == ["fig-reliability", "fig-decision-curve"]
    assert content.rules == [] and content.target_prevalence is None
    assert "No unlabelled rows" in page.text


def test_report_from_fitted_wrappers(tmp_path):
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

    train = make_parcels(2000, random_state=20)
    test = make_parcels(1200, random_state=21)
    winter = make_parcels(1200, season="winter", random_state=22)
    base = make_pipeline(StandardScaler(), LogisticRegression())
    policy = CostPolicyWrapper(
        CalibrationWrapper(base, method="platt", cv=3), costs=COSTS, strategy="tuned",
        actions=["ship", "inspect"], cv=3, random_state=0, n_resamples=20,
    ).fit(train.data, train.target)
    shift = PriorShiftWrapper(base, cv=3, n_resamples=20, random_state=0).fit(
        train.data, train.target
    )
    shift.adapt(winter.data)
    path = tmp_path / "wrapped.html"
    content = write_report(path, model=policy, X=test.data, y=test.target,
                           X_unlabelled=winter.data, prior_shift=shift, batch_size=400,
                           n_resamples=10)
    assert content.chosen_cutoff == policy.cutoff_
    assert content.chosen_interval == (policy.cutoff_interval_.low, policy.cutoff_interval_.high)
    assert content.calibration_method == "platt"
    assert content.action_names == ("ship", "inspect")
    assert content.target_prevalence == shift.target_prior_[1]
    assert content.shift_pvalue == shift.shift_pvalue_
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    assert _val(page.rows["chosen"][0]) == policy.cutoff_
    assert len(page.figures) == 5  # with the prevalence alarm of the batches


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"y_true": [0, 1, 0], "y_prob": [0.1, 1.2, 0.3]}, "`y_prob`"),
        ({"y_true": [0, 1, 0], "y_prob": [0.1, 0.2]}, "rows"),
        ({"y_true": [0, 0, 0], "y_prob": [0.1, 0.2, 0.3]}, "both classes"),
        ({"y_true": [0, 1, 2], "y_prob": [0.1, 0.2, 0.3]}, "`y_true`"),
        ({"y_prob": [0.1]}, "`y_true`"),
        ({"y_true": [0, 1], "y_prob": [0.2, 0.7], "capacity": 2.0}, "`capacity`"),
    ],
)
def test_bad_input_names_argument(tmp_path, kwargs, match):
    with pytest.raises(ValueError, match=match):
        write_report(tmp_path / "x.html", n_resamples=5, **kwargs)
    assert not (tmp_path / "x.html").exists()
