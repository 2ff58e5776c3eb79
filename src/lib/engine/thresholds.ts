/**
 * The engine's thresholds that screens quote, in a module of their own with no imports, so an island can
 * name the same number the engine applies without bundling the engine.
 */

/** A pair of identified parameters is strongly correlated when |r| is above this. */
export const HIGH_CORRELATION = 0.95;
