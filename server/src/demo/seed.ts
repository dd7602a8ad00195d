import 'reflect-metadata';
import { config, DEMO_PASSWORD } from '../platform/config';
import { appendAudit } from '../domain/accounts/audit';
import { closeDatabase, dataSource, initDatabase } from '../platform/database/dataSource';
import { seedAccounts } from './seeds/accounts';
import { seedGovernance } from './seeds/governance';
import { seedCohorts } from './seeds/cohorts';
import { seedGapsCohort } from './seeds/gapsCohort';
import { seedDrift } from './seeds/drift';
import { seedRuns } from './seeds/runs';
import { seedCompetingScore } from './seeds/competingScore';
import { seedKestrelScore } from './seeds/scenario';
import { seedSiteRun } from './seeds/siteRun';
import { seedDemoImputationRun } from './seeds/imputationRun';

export type SeedOutcome = 'seeded' | 'already has data';

/**
 * Seeds the invented demo scenario into an empty database, once. A database with any account is left exactly as it is:
 * a restart never files a review, a signature or an approval, and a changed demo password does not matter. The demo's
 * governance history is made here, the first time, through the same services (and rules) a person's actions go through.
 */
export async function seedDemo(): Promise<SeedOutcome> {
  if (config.production) throw new Error('the demo is never seeded in production (NODE_ENV=production)');
  const [{ n }]: { n: number }[] = await dataSource.query('SELECT count(*)::int AS n FROM users');
  if (n > 0) return 'already has data';
  await seedAccounts();
  // The fictional Kestrel score with versions 1 and 2 (seeds/scenario.ts).
  await seedKestrelScore();
  // After the score seed (seedKestrelScore): the demo quarters need the Kestrel score version.
  await seedCohorts();
  // A cohort whose Charlson index and prior admissions have gaps (seeds/gapsCohort.ts); needs the score.
  await seedGapsCohort();
  // Completed validation runs of Kestrel v2 on each demo quarter (seeds/runs.ts).
  await seedRuns();
  // Reviews and signatures on the demo runs (seeds/governance.ts): keep this last, after the runs are seeded.
  await seedGovernance();
  // The competing Wren index and its comparison with Kestrel v2 (seeds/competingScore.ts): after the reviews.
  await seedCompetingScore();
  // Drift rules and their alerts on the demo runs (seeds/drift.ts): last, it reads the runs.
  await seedDrift();
  // A run by site with bootstrap replicates on one quarter (seeds/siteRun.ts): after governance and drift, which it leaves alone.
  await seedSiteRun();
  // Multiple imputation beside the complete cases on the cohort with gaps (seeds/imputationRun.ts).
  await seedDemoImputationRun();
  await appendAudit({
    action: 'demo.seeded',
    sourceIp: 'seed',
    details: { note: 'invented demo scenario seeded into an empty database' },
  });
  return 'seeded';
}

const isMain = process.argv[1] && import.meta.url.endsWith(process.argv[1].split('/').pop()!);
if (isMain) {
  initDatabase(true)
    .then(() => seedDemo())
    .then(async (outcome) => {
      await closeDatabase();
      if (outcome === 'seeded')
        console.log(
          `Demo data ready. Demo accounts: admin@, steward@, statistician@, chair@, clinician@demo.test — password: ${DEMO_PASSWORD}`,
        );
      else
        console.log(
          'The database already has accounts: the demo is seeded only into an empty database, so nothing was changed.',
        );
    })
    .catch(async (err) => {
      console.error('Seeding failed:', err);
      await closeDatabase();
      process.exit(1);
    });
}
