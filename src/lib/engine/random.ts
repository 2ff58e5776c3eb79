/**
 * Seeded random numbers for everything the engine samples (hold-out draws, k-fold partitions, pose
 * candidates, workspace samples, compensation checks) and for the seeded test and demo data, so sampled
 * results are reproducible run after run.
 */

/** Seeded uniform generator in [0, 1) (mulberry32, public domain). */
export function seededRandom(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x6d2b79f5) >>> 0;
    let t = s;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/**
 * A standard normal deviate from two draws of `random` (Box–Muller, cosine branch; the first draw is
 * kept above 1e-300 so its logarithm is finite).
 */
export function normalVariate(random: () => number): number {
  const u = Math.max(random(), 1e-300);
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * random());
}
