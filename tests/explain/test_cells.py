"""Cell findings (investigator/explain/cells.py): planted cells in correlated Gaussian data as in the
simulations of Rousseeuw & Van den Bossche (2018), invented purchase-order lines with planted slips, and the
cell residuals against a direct, loop-by-loop computation of the DDC definition."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import investigator
from fixtures.cells import (
    AMOUNT_FACTORS,
    LOAD_LIMIT,
    a09,
    batch_measurements,
    correlated_cells,
    purchase_orders,
    tens_and_units_swapped,
)
from investigator.explain.cells import CUTOFF, CellModel

pytestmark = pytest.mark.slow  # each test scans a table of 500 to 3,000 records (2 to 10 s)


def found_mask(result, shape) -> np.ndarray:
    found = np.zeros(shape, dtype=bool)
    for i, cells in result.cells.findings().items():
        for c in cells:
            found[i, int(c.column[1:])] = True
    return found


def test_cutoff_is_the_chi2_quantile():
    # sqrt of the chi-square(1) 0.99 quantile = the normal's 0.995 quantile, 2.5758 (SciPy; handbook tables).
    assert abs(CUTOFF - stats.norm.ppf(0.995)) < 1e-12
    assert abs(CUTOFF - 2.5758) < 1e-4


def test_planted_cells_in_correlated_columns_are_found():
    # The paper's simulation design (from memory): 10 Gaussian columns with the A09 correlation 0.9^|j-h|,
    # here 500 rows and 10% of the cells shifted by 4 (random sign). Measured: all 503 planted cells found,
    # 0.29% of the other cells reported. Bounds checked: at least 95% found, at most 2% false cells.
    frame, planted = correlated_cells(n=500, p=10, share=0.10, shift=4.0, seed=0)
    result = investigator.scan(frame, options=investigator.ScanOptions(cells="all", log="none"))
    found = found_mask(result, planted.shape)
    assert (found & planted).sum() / planted.sum() >= 0.95
    assert (found & ~planted).sum() / (~planted).sum() <= 0.02


def test_few_false_cells_on_clean_correlated_columns():
    # Without planted cells, a cell passes the cutoff with probability 2 x (1 - Phi(2.576)) = 1% when the
    # residuals are normal (SciPy). Measured on 500 x 10 A09 data (seed 1): 1.56% of the cells. Checked: 0.2% to 2%.
    frame, _ = correlated_cells(n=500, p=10, share=0.0, seed=1)
    result = investigator.scan(frame, options=investigator.ScanOptions(cells="all", log="none"))
    rate = sum(len(c) for c in result.cells.findings().values()) / frame.size
    nominal = 2 * stats.norm.sf(CUTOFF)
    assert nominal == pytest.approx(0.01, rel=1e-9)
    assert 0.002 <= rate <= 0.02


def direct_ddc_residuals(X: np.ndarray) -> np.ndarray:
    """The DDC cell residuals computed cell by cell from the definition (from memory of Rousseeuw & Van den
    Bossche 2018), independently of the module: median/MAD standardisation, univariate outliers set aside,
    Gnanadesikan-Kettenring robust correlations, median-of-ratios slopes, weighted-mean predictions over
    columns with |correlation| >= 0.5, deshrinkage by the median ratio, residuals over their MAD scale."""
    n, p = X.shape
    c = np.sqrt(stats.chi2.ppf(0.99, 1))

    def median(values):
        s = sorted(values)
        m = len(s)
        return s[m // 2] if m % 2 else (s[m // 2 - 1] + s[m // 2]) / 2

    def mad(values):
        med = median(values)
        return 1.482602218505602 * median([abs(v - med) for v in values])

    Z = [[0.0] * p for _ in range(n)]
    for j in range(p):
        col = [X[i][j] for i in range(n)]
        med, s = median(col), mad(col)
        for i in range(n):
            Z[i][j] = (X[i][j] - med) / s
    U = [[z if abs(z) <= c else None for z in row] for row in Z]
    cor = [[1.0 if j == h else 0.0 for h in range(p)] for j in range(p)]
    slope = [[0.0] * p for _ in range(p)]
    for j in range(p):
        for h in range(p):
            if j == h:
                continue
            pairs = [(U[i][j], U[i][h]) for i in range(n) if U[i][j] is not None and U[i][h] is not None]
            plus = mad([a + b for a, b in pairs]) ** 2
            minus = mad([a - b for a, b in pairs]) ** 2
            cor[j][h] = (plus - minus) / (plus + minus)
            slope[j][h] = median([a / b for a, b in pairs if b != 0])
    pred = [[None] * p for _ in range(n)]
    for i in range(n):
        for j in range(p):
            num = den = 0.0
            for h in range(p):
                if h != j and abs(cor[j][h]) >= 0.5 and U[i][h] is not None:
                    num += abs(cor[j][h]) * slope[j][h] * U[i][h]
                    den += abs(cor[j][h])
            pred[i][j] = num / den if den > 0 else None
    R = np.full((n, p), np.nan)
    for j in range(p):
        rows = [i for i in range(n) if pred[i][j] is not None]
        a = median([Z[i][j] / pred[i][j] for i in rows if pred[i][j] != 0])
        s = mad([Z[i][j] - a * pred[i][j] for i in rows])
        for i in rows:
            R[i, j] = (Z[i][j] - a * pred[i][j]) / s
    return R


def test_cell_residuals_match_a_direct_computation_of_the_definition():
    rng = np.random.default_rng(3)
    cov = 0.8 ** np.abs(np.subtract.outer(np.arange(4), np.arange(4)))
    X = rng.multivariate_normal(np.zeros(4), cov, size=60)
    X[5, 1] += 6.0
    X[17, 3] -= 5.0
    frame = pd.DataFrame(X, columns=["a", "b", "c", "d"])
    result = investigator.scan(frame, options=investigator.ScanOptions(log="none", methods=("robust_distance",)))
    assert [s.scale_method for s in result.features.specs] == ["MAD"] * 4  # the direct code assumes MAD scales
    model = CellModel(result.features, 0)
    _, residuals = model.pairwise_residuals(model.standardised(result.features))
    expected = direct_ddc_residuals(X)
    np.testing.assert_allclose(residuals, expected, rtol=1e-9, atol=1e-9)
    assert abs(expected[5, 1]) > CUTOFF and abs(expected[17, 3]) > CUTOFF  # the planted cells stand out


@pytest.fixture(scope="module")
def orders():
    frame, planted = purchase_orders()
    result = investigator.scan(frame, options=investigator.ScanOptions(id="line", cells="all"))
    return frame, planted, result


def test_power_of_ten_slips_are_named_as_the_amount(orders):
    frame, planted, result = orders
    for kind, tag in (("x100", "x100?"), ("div10", "/10?")):
        for i in planted[kind]:
            first = result.cells.findings()[i][0]
            assert (first.column, first.tag) == ("amount", tag), (kind, i, first)
            truth = frame.quantity[i] * frame.unit_price[i]
            assert first.expected == pytest.approx(truth, rel=0.01)


def test_broken_products_are_named_with_the_value_that_restores_them(orders):
    # amount recorded as quantity x unit price x f, f from 0.55 to 1.9: the finding names amount or one of
    # its factors, and its expected value is within 10% of the value that makes the product hold again
    # (amount: quantity x unit price; a factor: the recorded amount over the other factor).
    frame, planted, result = orders
    names = []
    for i, f in zip(planted["factor"], AMOUNT_FACTORS, strict=True):
        first = result.cells.findings()[i][0]
        q, p, a = frame.quantity[i], frame.unit_price[i], frame.amount[i]
        restoring = {"amount": q * p, "quantity": a / p, "unit_price": a / q}
        assert first.column in restoring, (i, f, first)
        assert first.expected == pytest.approx(restoring[first.column], rel=0.10)
        names.append(first.column)
    assert names.count("amount") >= 4  # measured: 4 of the 6 name amount, one quantity, one unit_price


def test_smallest_change_mends_the_cell_the_findings_point_at(orders):
    # The case: an amount keyed x100 had "quantity 893.1 instead of 9" as its smallest change. With
    # the findings pointing at amount, the change tries amount first; where robust_distance flags the record
    # the change must touch the amount alone and bring the record back under the cutoff.
    frame, planted, result = orders
    checked = 0
    for i in planted["x100"] + planted["div10"]:
        e = result.explain(key=frame.line[i])
        if e.nearest_ordinary is None:
            continue
        checked += 1
        assert [c.feature for c in e.nearest_ordinary.changes] == ["amount"], (i, e.nearest_ordinary)
        assert e.nearest_ordinary.reaches_cutoff
    assert checked >= 3  # measured: robust_distance flags every one of the six slips


def test_approver_level_rare_for_the_amount_is_named(orders):
    _, planted, result = orders
    for i in planted["approver"]:
        cells = result.cells.findings()[i]
        assert any(c.column == "approver_level" and c.value == 1.0 and "rare for amount" in c.hint
                   for c in cells), (i, cells)


def test_few_findings_on_unplanted_order_lines(orders):
    # Measured: 18 of the 2,982 unplanted lines carry a finding (0.6%), rare but real combinations of
    # category and amount in the invented data. Checked: at most 2%.
    _, planted, result = orders
    slips = {i for rows in planted.values() for i in rows}
    with_findings = [i for i, cells in result.cells.findings().items() if cells and i not in slips]
    assert len(with_findings) <= 0.02 * (result.n_records - len(slips))


def test_every_output_reads_the_same_findings(orders, tmp_path):
    frame, planted, result = orders
    i = planted["x100"][0]
    doc = json.loads((result.write(tmp_path / "out.json")).read_text())
    cells = doc["records"][i]["cells"]
    assert cells[0]["column"] == "amount" and cells[0]["hint"].startswith("a factor of 100")
    assert set(cells[0]) == {"column", "value", "expected", "residual", "hint", "tag"}
    assert result.to_frame()["cells"][i].startswith("amount x100?")
    explained = result.explain(frame.line[i])
    assert explained.cells == result.cells.findings()[i]
    assert explained.to_dict()["cells"] == cells


def batch_findings(seed: int, tmp_path):
    frame, planted = batch_measurements(seed=seed)
    limits = tmp_path / "limits.csv"
    limits.write_text(f"column,lower,upper\nload,,{LOAD_LIMIT}\n")
    result = investigator.scan(frame, options=investigator.ScanOptions(id="batch", cells="all", limits=str(limits)))
    return frame, planted, result.cells.findings()


def test_each_kind_of_slip_gets_its_hint(tmp_path):
    # Invented batch records (fixtures/cells.py), five draws, one planted slip of each kind per draw. Measured:
    # sign, swapped fields and the limit named in 5 of 5 draws, the swapped tens and units digits of the load
    # in 3 of 5 (the swapped-back value must fit within one residual scale, which a true value does about
    # two times in three: the normal's P(|Z| <= 1) = 0.683, SciPy). Checked: all 5 and at least 2 of 5.
    named = {"sign": 0, "digits": 0, "swap": 0, "limit": 0}
    for seed in range(5):
        frame, planted, found = batch_findings(seed, tmp_path)
        for kind, (i, column) in planted.items():
            first = found[i][0]
            assert first.column == column, (seed, kind, found[i])  # the slip is the first finding ...
            assert len(found[i]) <= 2, (seed, kind, found[i])  # ... and the record is not off as a whole
            tags = first.tag.split(" ") if first.tag else []
            if kind == "sign" and tags == ["sign?"]:
                named[kind] += 1
            elif kind == "digits" and first.tag == "digits swapped?":
                assert f"{tens_and_units_swapped(frame.load[i]):g} would fit" in first.hint  # the value before the slip
                named[kind] += 1
            elif kind == "swap" and first.tag == "= length?":
                mate = [c for c in found[i] if c.column == "length"]
                assert mate and mate[0].tag == "= weight?", found[i]  # the mirror cell says it too
                assert first.value == frame.weight[i] and mate[0].value == frame.length[i]
                named[kind] += 1
            elif kind == "limit" and "above limit" in first.tag:
                assert "above the upper limit 400" in first.hint
                named[kind] += 1
    assert named["sign"] == named["swap"] == named["limit"] == 5, named
    assert named["digits"] >= 2, named


def test_hints_of_chance_misfits_are_rare_on_clean_columns():
    # On clean A09 columns the 1% of cells past the cutoff are chance: a sign, a power of ten or another
    # column's value fits some of them by chance. Measured (500 x 10, seed 1, every record): 78 cells, none
    # with a sign, power or field hint (52 at the cutoff before the clear-misfit rule), 7 with swapped digits.
    frame, _ = correlated_cells(n=500, p=10, share=0.0, seed=1)
    result = investigator.scan(frame, options=investigator.ScanOptions(cells="all", log="none"))
    tags = [c.tag for cells in result.cells.findings().values() for c in cells]
    assert len(tags) >= 20  # there are chance cells to judge
    assert not [t for t in tags if t and (t.startswith(("x", "/", "=")) or t == "sign?")], tags
    assert sum(t == "digits swapped?" for t in tags) <= 0.2 * len(tags)


def test_expected_value_of_a_cell_in_a_strongly_related_pair():
    # Five A09 columns and y = 10 + 3 x0 + N(0, 0.05^2): a strongly related pair (correlation 0.9999). 25
    # y cells per draw moved by 3 to 6 (1 to 2 of y's own standard deviations, so no column rule sees them).
    # Measured over draws 0-2: y named in 23, 25 and 22 of 25 records (in the others x0 was itself off its
    # A09 neighbours, and mending x0 fits the record better); the expected y within 2.5 noise standard
    # deviations of the true value at worst (median 0.6 to 1.0). Checked: at least 80% named, every expected
    # value within 3.5 noise standard deviations (0.175).
    noise = 0.05
    for seed in range(3):
        rng = np.random.default_rng(seed)
        X = rng.multivariate_normal(np.zeros(5), a09(5), size=500)
        frame = pd.DataFrame(X, columns=[f"x{j}" for j in range(5)])
        frame["y"] = 10 + 3 * X[:, 0] + rng.normal(0, noise, 500)
        rows = rng.choice(500, 25, replace=False)
        truth = frame.y[rows].to_numpy().copy()
        frame.loc[rows, "y"] = truth + rng.choice([-1, 1], 25) * rng.uniform(3, 6, 25)
        result = investigator.scan(frame, options=investigator.ScanOptions(cells="all", log="none"))
        found = result.cells.findings()
        named = [(c.expected, t) for i, t in zip(rows.tolist(), truth, strict=True)
                 for c in found[i] if c.column == "y"]
        assert len(named) >= 0.8 * len(rows), (seed, len(named))
        assert max(abs(e - t) for e, t in named) <= 3.5 * noise, seed
