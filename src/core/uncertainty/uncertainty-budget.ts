import type { CombinedUncertainty } from './combined-uncertainty.js';
import type { DistributionShape } from './distribution-shape.js';

/**
 * The uncertainty budget as a table: one line per source of uncertainty with its estimate,
 * standard uncertainty, distribution, sensitivity coefficient, contribution to the result, degrees
 * of freedom and share of the combined variance, then the covariance lines of shared sources and a
 * closing line with u_c, nu_eff, k and U. The columns follow the layout open guidance describes
 * (EA-4/02 M:2013, the budget table of its worked examples; JCGM 100:2008 H.1, Table H.1, from
 * memory); the headings are our own words. Numbers stay numbers (rounding for print is the
 * report's business: `roundedUncertainty` gives the GUM 7.2.6 two significant digits).
 *
 * Cost: O(rows).
 */
export interface BudgetColumn {
  key: keyof BudgetTableRow;
  heading: string;
}

export interface BudgetTableRow {
  source: string;
  estimate: number | null;
  standardUncertainty: number | null;
  distribution: string;
  sensitivity: number | null;
  contribution: number;
  dof: number | null;
  share: number | null;
}

export interface BudgetTable {
  columns: BudgetColumn[];
  rows: BudgetTableRow[];
  /** Covariance lines: between two members of a shared source (fully correlated). */
  covariance: BudgetTableRow[];
  total: { standardUncertainty: number; dof: number | null; coverageDof: number | null; coverageFactor: number | null; expandedUncertainty: number | null; confidence: number };
}

export const BUDGET_COLUMNS: BudgetColumn[] = [
  { key: 'source', heading: 'Source of uncertainty' },
  { key: 'estimate', heading: 'Value used' },
  { key: 'standardUncertainty', heading: 'Standard uncertainty' },
  { key: 'distribution', heading: 'Assumed distribution' },
  { key: 'sensitivity', heading: 'Sensitivity' },
  { key: 'contribution', heading: 'Effect on the result' },
  { key: 'dof', heading: 'Degrees of freedom' },
  { key: 'share', heading: 'Share of the variance' },
];

const SHAPE_WORDS: Record<DistributionShape, string> = { normal: 'normal', rectangular: 'rectangular', triangular: 'triangular', 'u-shaped': 'U-shaped' };

export function budgetTable(combined: CombinedUncertainty): BudgetTable {
  const single = new Set(combined.rows.map((r) => r.input)).size === 1;
  const label = (i: number) => {
    const row = combined.rows[i];
    if (row === undefined) return '';
    return single ? row.component : `${row.input}: ${row.component}`;
  };
  const rows: BudgetTableRow[] = combined.rows.map((row, i) => ({
    source: label(i),
    estimate: row.estimate,
    standardUncertainty: row.standardUncertainty,
    distribution: row.evaluation === 'A' ? `${SHAPE_WORDS[row.distribution]} (Type A)` : SHAPE_WORDS[row.distribution],
    sensitivity: row.sensitivity,
    contribution: row.contribution,
    dof: row.dof,
    share: row.share,
  }));
  const covariance: BudgetTableRow[] = combined.covarianceTerms.map((term) => ({
    source: `${label(term.rows[0])} with ${label(term.rows[1])} (shared: ${term.shared})`,
    estimate: null,
    standardUncertainty: null,
    distribution: 'fully correlated',
    sensitivity: null,
    contribution: term.term,
    dof: null,
    share: term.share,
  }));
  return {
    columns: BUDGET_COLUMNS,
    rows,
    covariance,
    total: {
      standardUncertainty: combined.standardUncertainty,
      dof: combined.dof,
      coverageDof: combined.coverageDof,
      coverageFactor: combined.coverageFactor,
      expandedUncertainty: combined.expandedUncertainty,
      confidence: combined.confidence,
    },
  };
}

/**
 * An uncertainty rounded to `digits` significant digits (GUM 7.2.6: "at most two significant
 * digits", wording from memory), rounding up when asked (some labs never round an uncertainty down;
 * common practice). Returns 0 for 0 and the value itself when it is not finite.
 */
export function roundedUncertainty(value: number, digits = 2, direction: 'nearest' | 'up' = 'nearest'): number {
  if (!Number.isFinite(value) || value === 0) return value;
  const exponent = Math.floor(Math.log10(Math.abs(value))) - digits + 1;
  const scale = 10 ** exponent;
  const scaled = value / scale;
  // 1e-9 guards against binary round-off pushing an exact value up a unit
  const rounded = direction === 'up' ? Math.ceil(scaled - 1e-9) : Math.round(scaled);
  return Number((rounded * scale).toPrecision(digits + 1));
}
