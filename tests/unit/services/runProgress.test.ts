// What a run says while it computes: each step once, in words, and the bootstrap counted replicate by replicate.
import { describe, expect, it } from 'vitest';
import { defaultRunSettings } from '@shared/runs';
import { periodGroupingOf } from '@shared/periodGrouping';
import { bootstrapProgressText, computeRunResults } from '../../../server/src/domain/runs/runCompute';
import { mulberry32 } from '../../../server/src/stats/bootstrap';

function cohort(n: number) {
  const rand = mulberry32(11);
  const risk: number[] = [];
  const outcome = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    risk.push(0.05 + 0.6 * rand());
    outcome[i] = rand() < risk[i] ? 1 : 0;
  }
  return {
    cohortVersionId: 'test',
    n,
    outcome,
    lineNo: Int32Array.from({ length: n }, (_, i) => i + 2),
    columns: { risk },
    eventDate: Array.from({ length: n }, (_, i) => (i % 2 ? '2026-01-01' : '2026-04-01')),
    subgroups: { unit: Array.from({ length: n }, (_, i) => (i % 3 ? 'Alder' : 'Birch')) },
  };
}

describe('run progress', () => {
  it('says "Computing bootstrap replicate k of N" with thousands separators', () => {
    expect(bootstrapProgressText(420, 2000)).toBe('Computing bootstrap replicate 420 of 2,000');
  });

  it('counts the bootstrap up to its last replicate while the bar moves forward, and names each step', () => {
    const told: [number, string][] = [];
    const settings = {
      ...defaultRunSettings(),
      bootstrapReplicates: 40,
      subgroupColumns: ['unit'],
      siteColumn: 'unit',
      timeGrouping: 'quarter' as const,
    };
    computeRunResults(
      { score: { mode: 'supplied', model: null, probabilityColumn: 'risk' }, data: cohort(400), settings },
      (f, m) => told.push([f, m]),
    );
    const messages = told.map(([, m]) => m);
    expect(messages).toContain('Computing bootstrap replicate 40 of 40');
    expect(messages).toContain('Computing subgroups by unit');
    expect(messages).toContain('Computing sites by unit');
    expect(messages).toContain('Computing periods by quarter');
    expect(messages.at(-1)).toBe('Done');
    // Never "computing — computing": no message names its step twice.
    for (const m of messages) expect(m.toLowerCase().match(/computing/g)?.length ?? 0).toBeLessThanOrEqual(1);
    const fractions = told.map(([f]) => f);
    expect([...fractions].sort((a, b) => a - b)).toEqual(fractions);
    const boot = told.filter(([, m]) => m.startsWith('Computing bootstrap'));
    expect(boot.at(-1)![0]).toBeCloseTo(0.5, 5);
  });
});

describe('the time grouping a cohort suggests', () => {
  it('is quarter for quarter starts or YYYY-Qn, month for other months, null without periods', () => {
    expect(periodGroupingOf(['2026-01-01', '2026-04-01'])).toBe('quarter');
    expect(periodGroupingOf(['2026-Q1', '2026-Q2'])).toBe('quarter');
    expect(periodGroupingOf(['2026-01-01', '2026-02-01'])).toBe('month');
    expect(periodGroupingOf(['2026-01', '2026-04'])).toBe('month');
    expect(periodGroupingOf(['(not recorded)'])).toBeNull();
    expect(periodGroupingOf([])).toBeNull();
  });
});
