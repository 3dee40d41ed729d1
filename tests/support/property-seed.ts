// Seed of the fast-check properties. Under CI (CI=true, as .ci/run sets it) one fixed seed, so a commit's
// result never depends on the draw; elsewhere a new seed each run, so local runs keep exploring.
// FAST_CHECK_SEED=N repeats a run that failed (fast-check prints the seed of a failure).
import fc from 'fast-check';

const CI_SEED = 20_261_202;
const requested = process.env.FAST_CHECK_SEED;
const seed = requested !== undefined ? Number(requested) : process.env.CI === 'true' ? CI_SEED : undefined;
if (seed !== undefined) {
  if (!Number.isSafeInteger(seed)) throw new Error(`FAST_CHECK_SEED must be an integer (got "${requested}")`);
  fc.configureGlobal({ seed });
}
