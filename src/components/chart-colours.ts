/**
 * Colours for chart marks, as the design tokens of src/styles/global.css (DESIGN.md): recharts and SVG take
 * them as `var(--color-…)`, so a chart follows the theme instead of restating its hex values.
 */

/** "After calibration" and the app's one accent (teal). */
export const ACCENT = 'var(--color-accent)';
/** "Nominal / before": the lighter grey for shapes (the text grey is --color-nominal). */
export const NOMINAL = 'var(--color-chart-nominal)';
/** Attention marks (amber, for shapes; the text amber is --color-attention). */
export const ATTENTION = 'var(--color-chart-attention)';
/** Grid lines and thin outlines. */
export const RULE = 'var(--color-rule)';
/** The fill of a hollow mark (excluded poses). */
export const HOLLOW = 'white';
