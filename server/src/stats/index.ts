/**
 * Plumbline's validation engine: `validate(p, y, settings)` returns every metric of a ValidationResult.
 * Pure (no I/O); each metric lives in its own file here with its formula and source. For a bootstrap across worker
 * threads use bootstrapInWorkers from server/src/jobs/threads/pool.ts.
 */
import type { ValidationResult, ValidationSettings } from '@shared/validation';
import { bootstrap } from './bootstrap';
import { computeFullSet, resolveSettings } from './fullSet';

export { ENGINE_VERSION, defaultValidationSettings, resolveSettings } from './fullSet';
export { EngineInputError, checkInputs } from './checkInputs';
export { applyModel } from './applyModel';
export { compareAucs } from './delongAuc';

/** `onReplicate` hears of each finished bootstrap replicate (the run's progress text counts them). */
export function validate(
  p: Float64Array,
  y: Uint8Array,
  settings: Partial<ValidationSettings> = {},
  onReplicate?: (done: number) => void,
): ValidationResult {
  const s = resolveSettings(settings);
  const result = computeFullSet(p, y, s);
  if (s.bootstrapReplicates > 0) result.bootstrap = bootstrap(p, y, s, result, onReplicate);
  return result;
}
