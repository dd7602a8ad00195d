// Demo cohort: eight invented quarters stored through the same path a steward's upload takes (screen → map → COPY).
import { createWriteStream } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { createHash } from 'node:crypto';
import type { ColumnMappingSpec } from '@shared/cohorts';
import { dataSource } from '../../platform/database/dataSource';
import { applyMapping, commitUpload, createUpload, getUpload, whenProcessed } from '../../domain/cohorts/uploads';
import { demoQuarters, kestrelQuarterCsv } from './kestrelData';
import { logger } from '../../platform/observability/log';

export const DEMO_COHORT_NAME = 'Fernhollow medical discharges (invented demo data)';
export const KESTREL_SCORE_NAME = 'Kestrel 30-day Readmission Score';

export const KESTREL_MAPPING: ColumnMappingSpec = {
  predictors: {
    age: 'age',
    length_of_stay: 'length_of_stay',
    prior_admissions: 'prior_admissions',
    emergency_admission: 'emergency_admission',
    charlson_index: 'charlson_index',
  },
  outcome: { column: 'readmitted_30d', positive: ['yes'], negative: ['no'] },
  date: { column: 'discharge_date' },
  subgroups: { sex: 'sex', age_band: 'age_band', unit: 'unit', site: 'site' },
  ranges: {},
};

export async function writeLines(file: string, lines: Iterable<string>): Promise<string> {
  const hash = createHash('sha256');
  const out = createWriteStream(file);
  for (const line of lines) {
    const chunk = `${line}\n`;
    hash.update(chunk);
    if (!out.write(chunk)) await new Promise<void>((r) => out.once('drain', () => r()));
  }
  await new Promise<void>((r) => out.end(() => r()));
  return hash.digest('hex');
}

/** Idempotent: quarters already stored (by label) are skipped. Needs the Kestrel score (seedKestrelScore) first. */
export async function seedCohorts(): Promise<void> {
  const sv: { id: string }[] = await dataSource.query(
    `SELECT sv.id FROM score_versions sv JOIN scores s ON s.id = sv.score_id WHERE s.name = $1 ORDER BY sv.version LIMIT 1`,
    [KESTREL_SCORE_NAME],
  );
  if (!sv.length) {
    logger.warn(
      `seedCohorts: score "${KESTREL_SCORE_NAME}" not found; run the score seed first — demo cohorts skipped`,
    );
    return;
  }
  const [steward] = await dataSource.query(`SELECT id, email, name, role FROM users WHERE email = 'steward@demo.test'`);
  if (!steward) throw new Error('seedCohorts: the demo steward account is missing');
  const dir = await mkdtemp(path.join(tmpdir(), 'plumbline-seed-'));
  try {
    for (const q of demoQuarters()) {
      const label = `${q.year}-Q${q.quarter}`;
      const cohort = await dataSource.query('SELECT id FROM cohorts WHERE name = $1', [DEMO_COHORT_NAME]);
      if (cohort.length) {
        const has = await dataSource.query('SELECT 1 FROM cohort_versions WHERE cohort_id = $1 AND label = $2', [
          cohort[0].id,
          label,
        ]);
        if (has.length) continue;
      }
      const file = path.join(dir, `fernhollow-${label}.csv`);
      const sha256 = await writeLines(file, kestrelQuarterCsv(q));
      const { size } = await import('node:fs/promises').then((m) => m.stat(file));
      const startMonth = (q.quarter - 1) * 3 + 1;
      const end = new Date(Date.UTC(q.year, startMonth + 2, 0)).toISOString().slice(0, 10);
      const { upload } = await createUpload(
        steward,
        { path: file, originalName: `fernhollow-${label}.csv`, sha256, bytes: size },
        {
          scoreVersionId: sv[0].id,
          ...(cohort.length ? { cohortId: cohort[0].id } : { cohortName: DEMO_COHORT_NAME }),
          label,
          periodStart: `${q.year}-${String(startMonth).padStart(2, '0')}-01`,
          periodEnd: end,
        },
        'seed',
      );
      await applyMapping(steward, upload.id, KESTREL_MAPPING, 'seed');
      await whenProcessed(upload.id);
      const checked = await getUpload(upload.id);
      if (checked.status !== 'checked')
        throw new Error(`seedCohorts: ${label} ended ${checked.status}: ${checked.error}`);
      await commitUpload(steward, upload.id, true, 'seed');
    }
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
}
