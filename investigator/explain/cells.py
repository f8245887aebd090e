"""Cell findings: which values of a record deviate from what its other values predict, and what was expected.

Numbers follow Detecting Deviating Data Cells (DDC: Rousseeuw & Van den Bossche 2018, "Detecting deviating
data cells", Technometrics 60(2), 135-145). The steps, from memory of the paper:

1. every numeric feature is robustly standardised (here: the preparer's median and MAD chain, on the log
   scale where the scan took logs, so that a product such as amount = quantity x unit price is a sum);
2. cells whose standardised value is beyond c = sqrt(chi2_1 quantile 0.99) = 2.576 are set aside (they
   predict nothing);
3. for every pair of columns a robust correlation (here the Gnanadesikan-Kettenring identity
   (s(u+v)^2 - s(u-v)^2) / (s(u+v)^2 + s(u-v)^2) with s the MAD scale) and a robust slope through the origin
   (the median of the ratios u_j / u_h); columns with |correlation| >= 0.5 are connected;
4. each cell's prediction is the weighted mean of the slopes x values of its connected columns in the same
   record (weights |correlation|), then "deshrunk" by the robust slope of the column on its predictions;
5. the cell residual (value - prediction) is standardised by the robust scale of the column's residuals, and
   a cell is flagged when |residual| > c.

Two additions of ours, for tables that hold exact relations:

* a **relation check**: each numeric column is also regressed on all the other numeric columns (least
  squares on up to 5,000 records without flagged cells, reweighted five times to drop residuals beyond c robust
  scales). Where this regression predicts the column at least twice as well as step 4, its residual flags
  a cell as well, and its prediction is the expected value. Deviations below 2% of a logged value (2% of
  the robust spread of an unlogged one) never count: stored values are rounded, so exact relations are
  inexact by that much;
* **one repair explains several flags**: one wrong value spoils the predictions of the cells it predicts,
  so a record's flagged cells are resolved one at a time. Each flagged cell in turn is replaced by its
  expected value; the cell whose repair leaves the fewest other flagged cells (a repair that is itself
  implausible - beyond c, or a fraction on a whole-number column - counts as one more) is reported first,
  ties going to the record that is most consistent after the repair (the smallest sum of squared pairwise
  residuals); the repair is kept and the rest resolved again. A record where more than half the judged cells
  (and more than 3) deviate, and still do after the best single repair, is off as a whole (DDC would flag the
  row): its cells are listed by |residual|, without repairs. (One wrong value in closely related columns makes
  every relation residual large; the single-repair test keeps it a cell finding.)

Categories: a level is reported when it is rare given a numeric partner column of the same record: the
partner's fitted values are cut into ten bins at their deciles, and the record's level is reported when
among the other records in its bin (at least 30) at most 1% have that level although its overall share
would give at least 10 of them. The partner must be a cell with no finding of its own. A simple
conditional-frequency rule of ours.

Hints say what the deviation looks like when a simple slip would explain it: the value is 10^k times the
expected value (k != 0, within a factor 1.5, and the value divided by 10^k passes the cell test), its sign
is flipped (the negated value passes), two adjacent digits are swapped (the swapped value fits within one
residual scale), it is another numeric column's value of the same record (swapped fields: with the two
values put back, neither cell deviates; the partner cell, when reported, gets the mirror hint), or it
breaks a specification limit (``limits``). Powers, signs and fields are named only for a clear misfit, at
least twice the cutoff.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace
from functools import partial
from types import MappingProxyType
from typing import TYPE_CHECKING

import numpy as np
from scipy import stats

from investigator.prepare.features import MAD_TO_SD, Features, FeatureSpec
from investigator.prepare.roles import CATEGORICAL, NUMERIC
from investigator.sampling import sample

if TYPE_CHECKING:  # the result is the pipeline's; this layer only reads it
    from investigator.pipeline.result import ScanResult

CUTOFF = float(np.sqrt(stats.chi2.ppf(0.99, 1)))  # 2.576: the paper's cutoff for cells, from memory
CORR_MIN = 0.5  # connected columns: |robust correlation| at least this (the paper's default, from memory)
FIT_ROWS = 20_000  # the pairwise statistics are fitted on at most this many records, drawn by content
MIN_ROWS = 30  # below this many records no cell findings at all (medians of ratios would be noise)
RELATION_GAIN = 0.5  # the relation check applies where its residual scale is below half the pairwise one
RELATION_FLOOR = 0.02  # relative deviation (logged) or share of spread (unlogged) never called a finding
REWEIGHTS = 5
RELATION_ROWS = 5_000  # the relation regressions are fitted on at most this many clean records
BINS = 10
BIN_MIN = 30  # other records in the partner's bin
RARE_SHARE = 0.01  # at most this share of them with the level ...
EXPECTED_MIN = 10  # ... although the level's overall share would give at least this many
POWER_SLACK = math.log10(1.5)
# A power of ten, a sign flip or two swapped fields is named only for a clear misfit, twice the cutoff: a
# marginal one (the 1% of ordinary cells beyond the cutoff) is mended about as well by another column's
# value, by the negated value in a column centred near 0 or by a tenth of it, by chance. Measured on 500 x 10
# clean A09 data, all records: 52 such hints at the cutoff, none at twice it; a genuine swap of weight and
# length (the batch fixture) misfits by hundreds of scales.
CLEAR_MISFIT = 2 * CUTOFF


@dataclass(frozen=True, slots=True)
class CellFinding:
    """One deviating cell: its column, the record's value, the expected value (the column's own units; the
    expected level for a category), the standardised residual (None for a category) and a hint in words
    (None when no simple slip explains it). ``tag`` is the short form of the hint for one-line outputs ("x100?",
    "" without a hint)."""

    column: str
    value: float | str
    expected: float | str | None
    residual: float | None
    hint: str | None
    tag: str = ""

    def to_dict(self) -> dict:
        return {"column": self.column, "value": self.value, "expected": self.expected,
                "residual": self.residual, "hint": self.hint, "tag": self.tag}

    def short(self) -> str:
        """The finding in a few characters: "amount x100?", "unit_price"."""
        return f"{self.column} {self.tag}" if self.tag else self.column


def _mad(x: np.ndarray) -> float:
    x = x[np.isfinite(x)]
    return float(np.median(np.abs(x - np.median(x)))) * MAD_TO_SD if len(x) else 0.0


def _slope(y: np.ndarray, x: np.ndarray, cor: float | None = None) -> float:
    """The robust slope of y on x through the origin: the median of the ratios y / x (the paper's, from
    memory). When ties make it 0 (over half of y at its median, as with a few whole-number levels), a choice
    of ours takes its place: the slope the robust correlation implies, cor x s(y) / s(x), with s the MAD scale
    (the standard deviation when that is 0), or without a correlation the least-squares slope through the
    origin on the pairs with |y| within the cutoff."""
    with np.errstate(divide="ignore", invalid="ignore"):
        b = float(np.median((y / x)[x != 0])) if (x != 0).any() else 0.0
    if b != 0 and np.isfinite(b):
        return b
    if cor is None:
        inside = np.abs(y) <= CUTOFF
        xx = float(np.sum(x[inside] ** 2))
        return float(np.sum(x[inside] * y[inside])) / xx if xx > 0 else 0.0
    sy, sx = _mad(y) or float(np.std(y)), _mad(x) or float(np.std(x))
    return cor * sy / sx if sx > 0 else 0.0


def _fmt(x: float) -> str:
    # Mirrors the terminal's number format (output/explanation.py), which this layer may not import.
    return f"{x:,.4g}" if abs(x) < 1e4 else f"{x:,.0f}"


def _in_units(spec: FeatureSpec, z: float) -> float:
    return float(spec.to_original(spec.center + spec.scale * z))


def _to_z(spec: FeatureSpec, values: np.ndarray) -> np.ndarray:
    """Values in the column's own units to standardised units (NaN where the log is undefined)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.log(values + spec.offset) if spec.transform == "log" else values
        return np.where(np.isfinite(t), (t - spec.center) / spec.scale, np.nan)


def _power_hint(value: float, expected: float) -> tuple[int, str, str] | None:
    if value <= 0 or expected <= 0:
        return None
    ratio = value / expected
    if not math.isfinite(ratio) or ratio <= 0:  # under- or overflow at extreme magnitudes: no power of ten to tell
        return None
    e = math.log10(ratio)
    k = round(e)
    if k == 0 or abs(e - k) > POWER_SLACK:
        return None
    factor = f"{10 ** abs(k):,}"
    return k, ("x" if k > 0 else "/") + factor + "?", f"a factor of {factor} {'too high' if k > 0 else 'too low'}" \
        ": a misplaced decimal point?"


def _digit_swaps(value: float) -> list[float]:
    """The numbers that swapping two adjacent, different digits of ``value`` gives (decimal point kept)."""
    text = f"{abs(value):.10g}"
    if "e" in text:
        return []
    digits = [k for k, ch in enumerate(text) if ch.isdigit()]
    out = []
    for a, b in zip(digits, digits[1:], strict=False):
        if text[a] != text[b]:
            chars = list(text)
            chars[a], chars[b] = chars[b], chars[a]
            out.append(math.copysign(float("".join(chars)), value))
    return out


class CellModel:
    """The fitted statistics of the cell test on a prepared feature matrix (numeric features only)."""

    def __init__(self, features: Features, salt) -> None:
        self.specs = features.specs
        self.columns = np.flatnonzero([s.role == NUMERIC for s in features.specs])
        self.names = [features.names[j] for j in self.columns]
        q = len(self.columns)
        Z = self.standardised(features)
        # Salt 23: a draw of its own (other samples use 7 to 19).
        rows = sample(features.values, FIT_ROWS, [salt, 23]) if len(Z) > FIT_ROWS else np.arange(len(Z))
        Z = Z[rows]
        U = np.where(np.abs(Z) > CUTOFF, np.nan, Z)
        cor = np.eye(q)
        slope = np.zeros((q, q))
        ok = np.isfinite(U)
        for j in range(q):
            for h in range(j + 1, q):
                both = ok[:, j] & ok[:, h]
                if both.sum() < MIN_ROWS:
                    continue
                u, v = U[both, j], U[both, h]
                plus, minus = _mad(u + v) ** 2, _mad(u - v) ** 2
                cor[j, h] = cor[h, j] = (plus - minus) / (plus + minus) if plus + minus > 0 else 0.0
                if abs(cor[j, h]) >= CORR_MIN:
                    slope[j, h] = _slope(u, v, cor[j, h])
                    slope[h, j] = _slope(v, u, cor[j, h])
        self.cor = cor
        self.weights = np.where((np.abs(cor) >= CORR_MIN) & ~np.eye(q, dtype=bool), np.abs(cor), 0.0)
        self.slope = slope
        self.deshrink = np.ones(q)
        self.scale = np.full(q, np.nan)
        pred = self._pairwise(U)
        for j in range(q):
            good = np.isfinite(Z[:, j]) & np.isfinite(pred[:, j]) & (pred[:, j] != 0)
            if good.sum() < MIN_ROWS:
                continue
            self.deshrink[j] = _slope(Z[good, j], pred[good, j])
            s = _mad(Z[good, j] - self.deshrink[j] * pred[good, j])
            self.scale[j] = s if s > 0 else np.nan
        # Numbers with a few whole levels (an approver level 1 to 4) follow the others in steps, not along a
        # line: they predict the other columns but are judged by the level rule alone.
        self.stepwise = np.array([CategoryRule.level_texts(features, int(c)) is not None for c in self.columns],
                                 dtype=bool)
        self.scale[self.stepwise] = np.nan
        self._fit_relations(Z, U)
        self.rel_scale[self.stepwise] = np.nan

    def standardised(self, features: Features) -> np.ndarray:
        """The numeric features on the robust scale, NaN where a cell was missing (it was imputed)."""
        Z = features.values[:, self.columns].astype(float)
        return np.where(features.imputed[:, self.columns], np.nan, Z)

    def _pairwise(self, U: np.ndarray) -> np.ndarray:
        ok = np.isfinite(U)
        num = np.where(ok, U, 0.0) @ (self.weights * self.slope).T
        den = ok.astype(float) @ self.weights.T
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(den > 0, num / den, np.nan)

    def pairwise_residuals(self, Z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Steps 2 to 5 (DDC) for the rows of ``Z``: the predictions (deshrunk, standardised units) and the
        standardised cell residuals; NaN where a cell has no available connected column."""
        U = np.where(np.abs(Z) > CUTOFF, np.nan, Z)
        pred = self.deshrink * self._pairwise(U)
        return pred, (Z - pred) / self.scale

    def _fit_relations(self, Z: np.ndarray, U: np.ndarray) -> None:
        q = len(self.columns)
        self.beta = np.zeros((q, q + 1))  # row j: intercept, then one coefficient per column (0 for j itself)
        self.rel_scale = np.full(q, np.nan)
        if q < 2:
            return
        _, r1 = self.pairwise_residuals(Z)
        clean = np.all(np.isfinite(Z), axis=1) & ~np.any(np.abs(r1) > CUTOFF, axis=1)
        if clean.sum() < MIN_ROWS + q:
            return
        Zc = Z[clean][:RELATION_ROWS]  # the fit rows are a draw by content already: any of them will do
        for j in range(q):
            others = [h for h in range(q) if h != j]
            A = np.column_stack([np.ones(len(Zc)), Zc[:, others]])
            y = Zc[:, j]
            keep = np.ones(len(y), dtype=bool)
            coef = np.zeros(q)
            for _ in range(REWEIGHTS):
                # The normal equations, solved by SVD: cheap at p + 1 unknowns, and safe when the other
                # columns are collinear among themselves (amount = quantity x unit price on the log scale).
                Ak = A[keep]
                coef = np.linalg.lstsq(Ak.T @ Ak, Ak.T @ y[keep], rcond=None)[0]
                res = y - A @ coef
                s = _mad(res[keep])
                if s == 0:
                    break
                keep = np.abs(res) <= CUTOFF * s
                if keep.sum() < MIN_ROWS + q:
                    break
            res = y - A @ coef
            spec = self.specs[self.columns[j]]
            floor = RELATION_FLOOR / CUTOFF / (spec.scale if spec.transform == "log" else 1.0)
            s = max(_mad(res[keep]), floor)
            # Against the pairwise residual scale, or the column's own (1) where no column is connected.
            if s < RELATION_GAIN * (self.scale[j] if np.isfinite(self.scale[j]) else 1.0):
                self.beta[j, 0] = coef[0]
                self.beta[j, [h + 1 for h in others]] = coef[1:]
                self.rel_scale[j] = s

    def residuals(self, Z: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """For the rows of ``Z``: the expected values (standardised units: the relation's prediction where
        the column has one, the pairwise one elsewhere), the pairwise residuals, and the relation residuals
        (NaN where the column has no relation)."""
        pred, r1 = self.pairwise_residuals(Z)
        rel = np.isfinite(self.rel_scale)
        if not rel.any():
            return pred, r1, np.full(Z.shape, np.nan)
        Zf = np.where(np.isfinite(Z), Z, 0.0)  # a missing predictor counts at its median
        pred2 = self.beta[:, 0] + Zf @ self.beta[:, 1:].T
        r2 = np.where(rel, (Z - pred2) / self.rel_scale, np.nan)
        return np.where(rel, pred2, pred), r1, r2

    @staticmethod
    def deviating(r1: np.ndarray, r2: np.ndarray) -> np.ndarray:
        """Cells beyond the cutoff: on the relation's residual where the column has a relation (it predicts
        the column at least twice as well), on the pairwise residual elsewhere."""
        with np.errstate(invalid="ignore"):
            return np.abs(np.where(np.isnan(r2), r1, r2)) > CUTOFF

    def whole_numbers(self, features: Features) -> np.ndarray:
        raw = features.raw[:, self.columns]
        with np.errstate(invalid="ignore"):
            return np.array([bool(np.all(np.isnan(c) | (c == np.round(c)))) for c in raw.T])

    def resolve(self, z: np.ndarray, whole: np.ndarray,
                extra: Callable[[np.ndarray], int] | None = None) -> tuple[list[tuple[int, float, float]], bool]:
        """The deviating cells of one record (standardised row ``z``), most explanatory first: (column,
        expected in standardised units, residual) for each, after the repairs of the ones before it.

        A record where more than half the cells that have a prediction (and more than 3) deviate, and still
        do after the best single repair, is off as a whole (DDC flags such rows rather than cells): its
        deviating cells come by |residual|, without the repair search, which would only pick among equally
        doubtful cells, and without hints (the second value returned says so). The repair test keeps one
        wrong value in closely related columns, which makes every relation residual large, a cell finding."""
        out, as_a_whole, _ = self.resolve_many(z[None, :], whole, None if extra is None else [extra])[0]
        return out, as_a_whole

    def resolve_many(self, Z: np.ndarray, whole: np.ndarray,
                     extras: list[Callable[[np.ndarray], int]] | None = None
                     ) -> list[tuple[list[tuple[int, float, float]], bool, list[np.ndarray]]]:
        """``resolve`` for every row of ``Z`` at once (``extras``: one per row, or None), plus, per reported
        cell, the expected values of the whole record just before that cell was repaired (what the hints
        test candidates against). The search runs in lock-step over the records: each round, one array pass
        gives the flags of every record still open, and one more the trials of all their repairs, so the
        Python left per record is the bookkeeping of its choice."""
        z = Z.copy()
        m, q = z.shape
        results: list[tuple[list[tuple[int, float, float]], bool, list[np.ndarray]]] = [
            ([], False, []) for _ in range(m)]
        if m == 0:
            return results
        # Each record as a stack of its own: the array pass then multiplies it exactly as it would alone,
        # so the findings do not depend on which other records are resolved with it (a matrix product over
        # many rows may round differently in the last bit).
        pred0, r1, r2 = (a[:, 0] for a in self.residuals(z[:, None, :]))
        deviating = self.deviating(r1, r2) & np.isfinite(z)
        r = np.where(np.isnan(r2), r1, r2)
        judged = np.sum(np.isfinite(r), axis=1)
        limit = np.maximum(3, judged / 2)
        # Many deviating cells may come from one: a wrong value in columns tied by a close relation makes
        # every relation residual large. Such a record is off as a whole only when no single repair brings
        # it back to at most the limit (decided on the first round of the search, below).
        suspect = deviating.sum(axis=1) > limit
        done = np.zeros((m, q), dtype=bool)
        active = np.arange(m)
        specs = [self.specs[c] for c in self.columns]
        for _ in range(q):
            if not len(active):
                break
            za = z[active]
            pred, r1, r2 = (a[:, 0] for a in self.residuals(za[:, None, :]))
            bad = self.deviating(r1, r2) & ~done[active] & np.isfinite(za)
            open_ = bad.any(axis=1)
            active, za, pred, r1, r2, bad = (a[open_] for a in (active, za, pred, r1, r2, bad))
            if not len(active):
                break
            # Every repair of every open record tried at once: one trial record per (record, deviating cell),
            # in the record's column order.
            rec, col = np.nonzero(bad)
            trial = np.arange(len(rec))
            trials = za[rec]
            trials[trial, col] = pred[rec, col]
            # The trials of the records with the same number of deviating cells as one stack: each record's
            # trials are multiplied as one block, as they would be alone.
            t1, t2 = np.empty_like(trials), np.empty_like(trials)
            counts = bad.sum(axis=1)
            per_trial = counts[rec]
            for c in np.unique(counts).tolist():
                at = np.flatnonzero(per_trial == c)
                _, g1, g2 = self.residuals(trials[at].reshape(-1, c, q))
                t1[at], t2[at] = g1.reshape(-1, q), g2.reshape(-1, q)
            left = self.deviating(t1, t2) & ~done[active][rec]
            left[trial, col] = False
            if suspect.any():  # the first round: records no single repair rescues are off as a whole
                best = np.full(len(active), q + 1)
                np.minimum.at(best, rec, left.sum(axis=1))
                whole_row = suspect[active] & (best > limit[active])
                for a in np.flatnonzero(whole_row).tolist():
                    n = int(active[a])
                    cols = np.flatnonzero(deviating[n])
                    cols = cols[np.argsort(-np.abs(r[n, cols]), kind="stable")]
                    results[n] = ([(int(j), float(pred0[n, j]), float(r[n, j])) for j in cols], True, [])
                suspect[:] = False
                keep = ~whole_row[rec]
                if not keep.all():
                    active_keep = ~whole_row
                    renumber = np.cumsum(active_keep) - 1
                    rec, col, trials, t1, t2, left = (x[keep] for x in (rec, col, trials, t1, t2, left))
                    trial = np.arange(len(rec))
                    rec = renumber[rec]
                    active, za, pred, r1, r2 = (x[active_keep] for x in (active, za, pred, r1, r2))
                    if not len(active):
                        break
            fixed = pred[rec, col]
            implausible = (np.abs(fixed) > CUTOFF).astype(int)
            for j in np.unique(col[whole[col]]).tolist():
                at = np.flatnonzero(col == j)
                value = np.asarray(specs[j].to_original(specs[j].center + specs[j].scale * fixed[at]), dtype=float)
                implausible[at] |= np.abs(value - np.round(value)) > 0.05
            if extras is not None:
                implausible += np.array([extras[active[a]](trials[k]) for k, a in enumerate(rec.tolist())],
                                        dtype=int)
            # Fewest flags left, then the most consistent record: the smallest sum of squared pairwise
            # residuals after the repair; ties to the first such cell (the sorts are stable).
            consistency = np.nansum(t1 ** 2, axis=1)  # row by row as one record's sum (C order, same loop)
            order = np.lexsort((consistency, left.sum(axis=1) + implausible, rec))
            first = order[np.r_[True, rec[order][1:] != rec[order][:-1]]]
            for k in first.tolist():
                a, j = int(rec[k]), int(col[k])
                n = int(active[a])
                residual = r2[a, j] if np.isfinite(r2[a, j]) else r1[a, j]
                results[n][0].append((j, float(pred[a, j]), float(residual)))
                results[n][2].append(pred[a])
                z[n, j] = pred[a, j]
                done[n, j] = True
        return results

    def expectation(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per column of the record ``z``: the expected value and the scale its residual is measured in
        (both standardised units). Neither depends on the column's own cell, so a candidate value c fits
        column j when |c - expected_j| <= scale_j x the cutoff."""
        pred, _, _ = (a[0] for a in self.residuals(z[None, :]))
        return pred, np.where(np.isfinite(self.rel_scale), self.rel_scale, self.scale)

    @property
    def hint_scale(self) -> np.ndarray:
        return np.where(np.isfinite(self.rel_scale), self.rel_scale, self.scale)

    def predicts(self, j: int) -> bool:
        return bool(np.isfinite(self.rel_scale[j]) or np.isfinite(self.scale[j]))


@dataclass(frozen=True)
class _Partner:
    column: int  # position among the model's numeric columns
    edges: np.ndarray  # inner bin edges, standardised units
    counts: np.ndarray  # level x bin
    share: np.ndarray  # level: share over the counted records


@dataclass(frozen=True)
class _Rare:
    strength: float  # (others with the level + 1) / the number its overall share would give: smaller is rarer
    column: int  # feature position of the level column
    partner: _Partner
    bin: int
    others: int  # k: other records in the bin with the level
    of: int  # m: other records in the bin


class CategoryRule:
    """The conditional-frequency rule for levels (see the module docstring): categories, and numeric
    columns with at most ``BINS`` distinct whole values (such as an approver level 1 to 4), whose relation
    to other numbers is a step rather than a line."""

    def __init__(self, features: Features, model: CellModel, Z: np.ndarray) -> None:
        self.columns: list[int] = []
        self.codes: dict[int, dict[str, int]] = {}
        self.levels: dict[int, list[str]] = {}
        self.partners: dict[int, list[_Partner]] = {}
        for c in range(len(features.specs)):
            texts = self.level_texts(features, c)
            if texts is None:
                continue
            levels, codes = np.unique(texts, return_inverse=True)
            self.columns.append(c)
            self.levels[c] = [str(v) for v in levels]
            self.codes[c] = {v: k for k, v in enumerate(self.levels[c])}
            partners = []
            for h in range(Z.shape[1]):
                if model.columns[h] == c:
                    continue
                x = Z[:, h]
                ok = np.isfinite(x)
                if ok.sum() < BINS * BIN_MIN:
                    continue
                edges = np.unique(np.quantile(x[ok], np.linspace(0, 1, BINS + 1)[1:-1]))
                bins = np.searchsorted(edges, x[ok], side="right")
                counts = np.zeros((len(levels), len(edges) + 1), dtype=int)
                np.add.at(counts, (codes[ok], bins), 1)
                partners.append(_Partner(h, edges, counts, counts.sum(axis=1) / counts.sum()))
            self.partners[c] = partners

    @staticmethod
    def level_texts(features: Features, c: int) -> np.ndarray | None:
        """The levels of column ``c`` as text, or None when it is not a level column."""
        spec = features.specs[c]
        if spec.role == CATEGORICAL and c in features.levels:
            return features.levels[c].astype(str)
        if spec.role != NUMERIC:
            return None
        x = features.raw[:, c]
        present = x[np.isfinite(x)]
        if not len(present) or np.any(present != np.round(present)) or len(np.unique(present)) > BINS:
            return None
        return np.array([f"{v:g}" if np.isfinite(v) else "" for v in x], dtype=object).astype(str)

    def record_codes(self, features: Features, i: int) -> dict[int, int]:
        out = {}
        for c in self.columns:
            texts = self.level_texts(features.subset(np.array([i])), c)
            code = self.codes[c].get(str(texts[0])) if texts is not None else None
            if code is not None:
                out[c] = code
        return out

    def rare(self, codes: dict[int, int], z: np.ndarray, counted: bool) -> list[_Rare]:
        """Every (level column, partner) where the record's level is rare given the partner, rarest first."""
        out = []
        for c, code in codes.items():
            for p in self.partners[c]:
                if not np.isfinite(z[p.column]):
                    continue
                b = int(np.searchsorted(p.edges, z[p.column], side="right"))
                m = int(p.counts[:, b].sum()) - int(counted)
                k = int(p.counts[code, b]) - int(counted)
                expected = p.share[code] * m
                if m >= BIN_MIN and k <= RARE_SHARE * m and expected >= EXPECTED_MIN:
                    out.append(_Rare((k + 1) / expected, c, p, b, k, m))
        return sorted(out, key=lambda r: r.strength)

    def count(self, codes: dict[int, int], z: np.ndarray, counted: bool) -> int:
        """How many level columns are rare given some partner (the repair search's extra evidence)."""
        return len({r.column for r in self.rare(codes, z, counted)})

    def findings(self, features: Features, i: int, z: np.ndarray, model: CellModel, blamed: set[int],
                 counted: bool) -> list[CellFinding]:
        """The level findings of record ``i`` (``z``: its standardised numbers, repaired; ``blamed``: feature
        positions with findings already; ``counted``: whether the record is among the counted records). A
        level rare given a partner that has a finding of its own is not reported (the partner explains it),
        nor a level whose column is the partner of a rarer finding."""
        out = []
        codes = self.record_codes(features, i)
        partners_used: set[int] = set()
        for r in self.rare(codes, z, counted):
            partner = int(model.columns[r.partner.column])
            if r.column in blamed or partner in blamed or r.column in partners_used:
                continue
            blamed.add(r.column)
            partners_used.add(partner)
            p, b = r.partner, r.bin
            spec = model.specs[partner]
            name = model.names[p.column]
            lo = _in_units(spec, float(p.edges[b - 1])) if b > 0 else None
            hi = _in_units(spec, float(p.edges[b])) if b < len(p.edges) else None
            if lo is not None and hi is not None:
                where = f"from {_fmt(lo)} to {_fmt(hi)}"
            else:
                where = f"above {_fmt(lo)}" if lo is not None else f"below {_fmt(hi)}" if hi is not None else "any"
            col = features.names[r.column]
            level = self.levels[r.column][codes[r.column]]
            common = self.levels[r.column][int(np.argmax(p.counts[:, b]))]
            numeric = features.specs[r.column].role == NUMERIC
            out.append(CellFinding(col, float(level) if numeric else level, float(common) if numeric else common,
                                   None, f"{col} {level} is rare for {name} {where}: {r.others:,} of {r.of:,} "
                                   "such records", f"rare for {name}?"))
        return out


@dataclass(frozen=True)
class _Asked:
    """One reported cell whose hint is wanted: ``pred`` is the record's expected values (standardised units)
    as ``CellModel.expectation`` gives them just before the cell was repaired (the search has them at hand),
    ``raw`` the record's numeric values as read, ``limits`` its limit hits; ``record`` tells the records
    apart."""

    record: int
    pred: np.ndarray
    j: int
    value: float
    expected: float
    residual: float
    raw: np.ndarray
    limits: list[dict]


def _hints(model: CellModel, asked: list[_Asked]) -> list[tuple[str, str]]:
    """The hint of each asked cell (words, tags), in one array pass per column: a power of ten, else a
    flipped sign, else two swapped digits, else another column's value (each candidate must fit the cell's
    expected value); then the limits the value is beyond."""
    found: list[tuple[list[str], list[str]]] = [([], []) for _ in asked]
    by_column: dict[int, list[int]] = {}
    for n, a in enumerate(asked):
        by_column.setdefault(a.j, []).append(n)
    scale = model.hint_scale
    predicts = np.array([model.predicts(h) for h in range(len(model.columns))], dtype=bool)
    specs = [model.specs[c] for c in model.columns]
    partners = np.full(len(asked), -1)
    for j, members in by_column.items():
        partners[members] = _column_hints(model, j, [asked[n] for n in members], [found[n] for n in members],
                                          scale, predicts, specs)
    # Swapped fields come in pairs: when the record's other cell of the pair is reported too, without a hint
    # of its own, it gets the mirror hint (its closer test may miss what the first cell's found).
    cell_of = {(a.record, a.j): n for n, a in enumerate(asked)}
    for n in np.flatnonzero(partners >= 0).tolist():
        mate = cell_of.get((asked[n].record, int(partners[n])))
        if mate is not None and not found[mate][0]:
            name = model.names[asked[n].j]
            found[mate][1].append(f"= {name}?")
            found[mate][0].append(f"it is this record's {name}: swapped fields?")
    out = []
    for a, (words, tags) in zip(asked, found, strict=True):
        for hit in a.limits:
            if hit.get("column") == model.names[a.j]:
                side, bound = hit["side"], hit["upper"] if hit["side"] == "above" else hit["lower"]
                tags.append(f"{side} limit")
                words.append(f"{side} the {'upper' if side == 'above' else 'lower'} limit {_fmt(float(bound))}")
        out.append(("; ".join(words), " ".join(tags)))
    return out


def _column_hints(model: CellModel, j: int, asked: list[_Asked], found: list[tuple[list[str], list[str]]],
                  scale: np.ndarray, predicts: np.ndarray, specs: list[FeatureSpec]) -> np.ndarray:
    """The slip hints of cells of one column ``j`` (appended to ``found``); per cell, the column whose value
    it holds (swapped fields), or -1."""
    v = np.array([a.value for a in asked])
    e = np.array([a.expected for a in asked])
    P = np.vstack([a.pred for a in asked])  # m x q expected values
    R = np.vstack([a.raw for a in asked])  # m x q values as read
    p = P[:, j]

    def fits(candidates: np.ndarray, centre: np.ndarray, spec: FeatureSpec, width) -> np.ndarray:
        cand = _to_z(spec, candidates)
        with np.errstate(invalid="ignore"):
            return np.isfinite(cand) & (np.abs(cand - centre) <= width)

    misfit = np.array([abs(a.residual) for a in asked]) >= CLEAR_MISFIT
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ratio = v / e
        usable = misfit & (v > 0) & (e > 0) & np.isfinite(ratio) & (ratio > 0)
        power = np.where(usable, np.log10(np.where(usable, ratio, 1.0)), 0.0)
        k = np.round(power)
        usable &= (k != 0) & (np.abs(power - k) <= POWER_SLACK)
        by_power = usable & fits(v / 10.0 ** k, p, specs[j], CUTOFF * scale[j])
    by_sign = ~by_power & misfit & (v * e < 0) & fits(-v, p, specs[j], CUTOFF * scale[j])
    rest = np.flatnonzero(~by_power & ~by_sign)
    # Two swapped digits must give a value that fits closely (within one residual scale, not the cutoff):
    # among the several numbers a swap could give, one is near the expected value by chance too often.
    options = [_digit_swaps(float(v[n])) for n in rest]
    owner = np.repeat(rest, [len(o) for o in options])
    flat = np.array([x for o in options for x in o], dtype=float)
    swap_ok = fits(flat, p[owner], specs[j], scale[j]) if len(flat) else np.zeros(0, dtype=bool)
    swapped: dict[int, list[float]] = {}
    for n, x in zip(owner[swap_ok].tolist(), flat[swap_ok].tolist(), strict=True):
        swapped.setdefault(n, []).append(x)
    unswapped = np.array([n for n in rest.tolist() if n not in swapped and misfit[n]], dtype=int)
    partner = np.full(len(asked), -1)
    if len(unswapped):
        q = R.shape[1]
        Ru, vu = R[np.ix_(unswapped, np.arange(q))], v[unswapped]
        other = np.isfinite(Ru) & (Ru != vu[:, None])
        other[:, j] = False
        # A candidate column must hold a value near this cell's expected one (the cutoff, a prefilter) ...
        here = other & fits(Ru, p[unswapped, None], specs[j], CUTOFF * scale[j])
        # ... and putting both values back where they belong must leave neither cell deviating: the record's
        # own test, so a swap of two related columns is judged with both of them repaired at once.
        there = np.zeros_like(here)
        u_at, h_at = np.nonzero(here)
        if len(u_at):
            Zu = np.column_stack([_to_z(specs[c], Ru[:, c]) for c in range(q)])
            trials = Zu[u_at].copy()
            rows = np.arange(len(u_at))
            trials[rows, j] = _to_z(specs[j], Ru[u_at, h_at])
            for h in np.unique(h_at).tolist():
                at = h_at == h
                trials[rows[at], h] = _to_z(specs[h], vu[u_at[at]])
            _, t1, t2 = (a[:, 0] for a in model.residuals(trials[:, None, :]))
            fit = ~model.deviating(t1, t2) & np.isfinite(trials)
            with np.errstate(invalid="ignore"):
                ok = fit[rows, j] & np.where(predicts[h_at], fit[rows, h_at], np.abs(trials[rows, h_at]) <= CUTOFF)
            there[u_at[ok], h_at[ok]] = True
        both = here & there
        hit = both.any(axis=1)
        partner[unswapped[hit]] = np.argmax(both[hit], axis=1)
    for n in range(len(asked)):
        words, tags = found[n]
        if by_power[n]:
            _, tag, said = _power_hint(float(v[n]), float(e[n])) or (0, "", "")
            tags.append(tag)
            words.append(said)
        elif by_sign[n]:
            tags.append("sign?")
            words.append("the sign is flipped?")
        elif n in swapped:
            near = min(swapped[n], key=lambda x: abs(x - e[n]))
            tags.append("digits swapped?")
            words.append(f"two adjacent digits swapped? {_fmt(near)} would fit")
        elif partner[n] >= 0:
            tags.append(f"= {model.names[partner[n]]}?")
            words.append(f"it is this record's {model.names[partner[n]]}: swapped fields?")
    return partner


class CellFinder:
    """The cell findings of one scan result: fitted once on first use (on the reference records in check
    mode; by a model that scores blocks, on its sample), then read by every output. ``findings()`` holds the
    records of the scan's ``cells`` scope (flagged records by default, all with ``cells="all"``)."""

    def __init__(self, result: ScanResult, fitted: tuple[CellModel, CategoryRule] | None = None) -> None:
        self.result = result
        self._lock = threading.RLock()
        self._fitted = fitted
        # Level counts include the record itself only when they were counted on the scan's own records.
        self._counted = fitted is None and result.reference_features is None
        self._scope: Mapping[int, tuple[CellFinding, ...]] | None = None

    @property
    def fitted(self) -> tuple[CellModel, CategoryRule]:
        """The fitted cell test and level rule (a model that scores blocks hands them to each block)."""
        return self._fit()

    def _fit(self) -> tuple[CellModel, CategoryRule]:
        with self._lock:
            if self._fitted is None:
                ref = self.result.reference_features
                fit_on = ref if ref is not None else self.result.features
                model = CellModel(fit_on, self.result.options.seed)
                self._fitted = (model, CategoryRule(fit_on, model, model.standardised(fit_on)))
            return self._fitted

    def findings(self) -> Mapping[int, tuple[CellFinding, ...]]:
        """The findings of every record in the scope, by 0-based position (read-only; computed once)."""
        with self._lock:
            if self._scope is None:
                scope = getattr(self.result.options, "cells", "flagged")
                positions = (np.arange(self.result.n_records) if scope == "all"
                             else np.flatnonzero(self.result.flagged))
                self._scope = MappingProxyType(dict(zip(positions.tolist(), self.of(positions), strict=True)))
            return self._scope

    def of(self, positions) -> list[tuple[CellFinding, ...]]:
        """The findings of the records at 0-based ``positions`` (the scope's when kept, otherwise now)."""
        positions = np.asarray(positions, dtype=int)
        if self._scope is not None and all(int(i) in self._scope for i in positions):
            return [self._scope[int(i)] for i in positions]
        if len(positions) == 0 or self.result.n_records < MIN_ROWS:
            return [() for _ in positions]
        model, rule = self._fit()
        features = self.result.features
        Z = model.standardised(features.subset(positions))
        suspect: np.ndarray = np.zeros(len(positions), dtype=bool)
        if Z.shape[1]:
            _, r1, r2 = model.residuals(Z)
            suspect = np.asarray(np.any(model.deviating(r1, r2), axis=1), dtype=bool)
        whole = model.whole_numbers(features)
        counted = self._counted
        levels = bool(rule.columns)  # without level columns the level rule finds nothing: skip it per record
        rows = np.flatnonzero(suspect)
        codes = {n: rule.record_codes(features, positions[n]) for n in rows.tolist()} if levels else {}
        extras: list[Callable[[np.ndarray], int]] | None = (
            [partial(rule.count, codes[n], counted=counted) for n in rows.tolist()] if levels else None)
        resolved = dict(zip(rows.tolist(), model.resolve_many(Z[rows], whole, extras), strict=True))
        out: list[list[CellFinding]] = []
        asked: list[_Asked] = []
        where: list[tuple[int, int]] = []  # (record, cell) of each asked hint
        for n, i in enumerate(positions.tolist()):
            cells: list[CellFinding] = []
            blamed: set[int] = set()
            repaired = Z[n].copy()
            if n in resolved:
                raw = features.raw[i, model.columns]
                limits = self.result.out_of_spec[i] if self.result.out_of_spec is not None else []
                found, as_a_whole, before = resolved[n]
                for step, (j, expected_z, residual) in enumerate(found):
                    spec = model.specs[model.columns[j]]
                    value, expected = float(raw[j]), _in_units(spec, expected_z)
                    cells.append(CellFinding(model.names[j], value, expected, residual, None, ""))
                    if not as_a_whole:
                        asked.append(_Asked(n, before[step], j, value, expected, residual, raw, limits))
                        where.append((n, len(cells) - 1))
                    repaired[j] = expected_z
                    blamed.add(int(model.columns[j]))
            if levels:
                cells += rule.findings(features, i, repaired, model, blamed, counted)
            out.append(cells)
        for (n, c), (hint, tag) in zip(where, _hints(model, asked), strict=True):
            out[n][c] = replace(out[n][c], hint=hint or None, tag=tag)
        return [tuple(cells) for cells in out]


def cells_text(cells: tuple[CellFinding, ...]) -> str:
    """The findings of one record in one line (the CSV/Parquet column): "amount x100?; unit_price"."""
    return "; ".join(c.short() for c in cells)
