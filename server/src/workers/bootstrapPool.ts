/**
 * The bootstrap across worker threads: splits replicates 0 … R−1 into one contiguous range per core and runs
 * bootstrapWorker.ts on each. Each replicate has its own random stream (stats/bootstrap.ts), so the intervals are the
 * same as the single-thread bootstrap for the same seed, whatever the number of workers.
 * Workers start through startTsWorker (tsWorker.ts): tsx's loader from the sources, the compiled file in the build.
 * Pool size: by default one core is left to the API thread and PostgreSQL (cores − 1, at least one worker); the workers
 * also lower their own priority (threadPriority.ts). Callers that own the machine (the engine benchmark) pass a count.
 */
import { availableParallelism } from 'node:os';
import type { ValidationResult, ValidationSettings } from '@shared/validation';
import { percentileIntervals, scalarMetrics } from '../stats/bootstrap';
import { computeFullSet, resolveSettings } from '../stats/fullSet';
import { startTsWorker } from './tsWorker';


/** Cores − 1 (at least 1): on the 2-core reference machine a bootstrap never takes both cores from the API. */
export const defaultBootstrapWorkers = () => Math.max(1, availableParallelism() - 1);

export async function bootstrapInWorkers(
  p: Float64Array,
  y: Uint8Array,
  settings: ValidationSettings,
  point: ValidationResult,
  workers = defaultBootstrapWorkers(),
): Promise<NonNullable<ValidationResult['bootstrap']> & { workers: number }> {
  const R = settings.bootstrapReplicates;
  const k = Math.max(1, Math.min(workers, R));
  const ranges = Array.from({ length: k }, (_, i) => [Math.floor((i * R) / k), Math.floor(((i + 1) * R) / k)]);
  const parts = await Promise.all(
    ranges.map(
      ([from, to]) =>
        new Promise<Record<string, number>[]>((resolve, reject) => {
          const w = startTsWorker('bootstrapWorker', { p, y, settings, from, to });
          w.once('message', resolve);
          w.once('error', reject);
          w.once('exit', (code) => code !== 0 && reject(new Error(`bootstrap worker exited with code ${code}`)));
        }),
    ),
  );
  return { ...percentileIntervals(scalarMetrics(point), parts.flat(), settings.bootstrapSeed), workers: k };
}

/** validate() with the bootstrap spread over worker threads. */
export async function validateWithBootstrap(p: Float64Array, y: Uint8Array, settings: Partial<ValidationSettings> = {}, workers?: number): Promise<ValidationResult> {
  const s = resolveSettings(settings);
  const result = computeFullSet(p, y, s);
  if (s.bootstrapReplicates > 0) {
    const { workers: _used, ...b } = await bootstrapInWorkers(p, y, s, result, workers);
    result.bootstrap = b;
  }
  return result;
}
