import 'reflect-metadata';
import { initDatabase, closeDatabase, dataSource } from './db/dataSource';
import { recalibrationPreview } from './services/drift';
await initDatabase(false);
const [r] = await dataSource.query(`SELECT r.id FROM validation_runs r JOIN cohort_versions cv ON cv.id=r.cohort_version_id WHERE cv.label='2025-Q4' AND r.status='completed' LIMIT 1`);
for (const m of ['intercept', 'logistic', 'closed-test'] as const) { const t = Date.now(); const d = await recalibrationPreview(r.id, m); console.log(m, Date.now() - t, 'ms', d.chosen, d.intercept, d.slope, d.after.citl, d.lrTests); }
await closeDatabase();
