import 'reflect-metadata';
import { DEMO_PASSWORD } from '../config';
import { closeDatabase, initDatabase } from './dataSource';
import { seedAccounts } from './seeds/accounts';
import { seedGovernance } from './seeds/governance';
import { seedCohorts } from './seeds/cohorts';
import { seedDrift } from './seeds/drift';
import { seedRuns } from './seeds/runs';
import { seedKestrelScore } from './seeds/scenario';

/** Seeds the invented demo scenario. Idempotent: a second run changes nothing. */
export async function seedDemo(): Promise<void> {
  await seedAccounts();
  // The fictional Kestrel score with versions 1 and 2 (seeds/scenario.ts).
  await seedKestrelScore();
  // After the score seed (seedKestrelScore): the demo quarters need the Kestrel score version.
  await seedCohorts();
  // Completed validation runs of Kestrel v2 on each demo quarter (seeds/runs.ts).
  await seedRuns();
  // Reviews and signatures on the demo runs (seeds/governance.ts): keep this last, after the runs are seeded.
  await seedGovernance();
  // Drift rules and their alerts on the demo runs (seeds/drift.ts): last, it reads the runs.
  await seedDrift();
}

const isMain = process.argv[1] && import.meta.url.endsWith(process.argv[1].split('/').pop()!);
if (isMain) {
  initDatabase(true)
    .then(() => seedDemo())
    .then(async () => {
      await closeDatabase();
      console.log(`Demo data ready. Demo accounts: admin@, steward@, statistician@, chair@, clinician@demo.test — password: ${DEMO_PASSWORD}`);
    })
    .catch(async (err) => {
      console.error('Seeding failed:', err);
      await closeDatabase();
      process.exit(1);
    });
}
