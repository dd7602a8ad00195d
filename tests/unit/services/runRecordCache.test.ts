// The in-memory records of completed runs (server/src/domain/runs/runRecordCache.ts): only a completed record is kept,
// concurrent first reads share one load, a kept record cannot be changed by a caller, and a failed load is not kept.
// Common practice, no source: the rule being tested is the project's own (completed runs are immutable).
import { beforeEach, describe, expect, it } from 'vitest';
import type { ValidationRun } from '../../../server/src/platform/database/entities/ValidationRun';
import { clearRunRecordCache, completedRunRecord } from '../../../server/src/domain/runs/runRecordCache';

const record = (id: string, status: string) =>
  ({
    id,
    status,
    results: { overall: { n: 10, auc: { estimate: 0.7 } } },
    settings: { subgroupColumns: [] },
  }) as unknown as ValidationRun;

beforeEach(() => clearRunRecordCache());

describe('completed run records in memory', () => {
  it('loads a completed record once and then answers from memory', async () => {
    let loads = 0;
    const load = async () => (loads++, record('a', 'completed'));
    const [x, y] = await Promise.all([completedRunRecord('a', load), completedRunRecord('a', load)]);
    const z = await completedRunRecord('a', load);
    expect(loads).toBe(1);
    expect(x).toBe(y);
    expect(z).toBe(x);
  });

  it('freezes what it keeps, deeply', async () => {
    const r = await completedRunRecord('b', async () => record('b', 'completed'));
    expect(() => {
      (r.results as unknown as { overall: { n: number } }).overall.n = 11;
    }).toThrow(TypeError);
  });

  it('keeps nothing that is not completed, and nothing whose load failed', async () => {
    let loads = 0;
    await completedRunRecord('c', async () => (loads++, record('c', 'running')));
    await completedRunRecord('c', async () => (loads++, record('c', 'completed')));
    expect(loads).toBe(2);
    await expect(
      completedRunRecord('d', async () => {
        throw new Error('database down');
      }),
    ).rejects.toThrow('database down');
    const again = await completedRunRecord('d', async () => record('d', 'completed'));
    expect(again.status).toBe('completed');
  });
});
