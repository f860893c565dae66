/**
 * Anytime-valid evidence across completed live runs, read in this order:
 *   ./calibrators.ts   one p-value to one e-value (calibrators; the lattice and its lemma)
 *   ./bettors.ts       choosing the next calibrator from the runs so far (predictable betting)
 *   ./martingale.ts    the running product of the bets: a test martingale, and Ville's inequality
 *   ./event.ts         per statistic, per vignette, and the event: averages and products of martingales
 *   ./fisher-fixed.ts  the fixed-sample Fisher comparison, valid only for a run count fixed in advance
 * The evidence may be read after every run, the event may stop or go on for any reason, and the
 * chance that it EVER reaches 1/α under the null is at most α.
 */
export {
  cachedTableCount,
  calibratorCumulative,
  calibratorValue,
  DEFAULT_RESOLUTION,
  latticeCalibrator,
  latticeIndex,
  MAX_RESOLUTION,
  normalShiftCalibrator,
  powerCalibrator,
  shaferCalibrator,
  vovkWangCalibrator,
  type CalibratorSpec,
} from './calibrators.js';
export { createBettor, DEFAULT_KAPPAS, DEFAULT_STRATEGY, grenanderOnLattice, type Bettor, type EvidenceStrategy } from './bettors.js';
export { createEvidenceStream, sequentialEvidence, type EvidenceOptions, type EvidenceStream, type SequentialEvidence } from './martingale.js';
export {
  combineLevels,
  eventEvidence,
  type CombinedEvidence,
  type EventCombination,
  type EventEvidence,
  type EventEvidenceOptions,
  type StreamRun,
  type VignetteEvidence,
} from './event.js';
export { fisherFixed, type FixedSampleFisher } from './fisher-fixed.js';
