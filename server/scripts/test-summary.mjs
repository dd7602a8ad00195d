// Adds up the vitest JSON reports and prints one closing line: "N passed, N failed".
import { existsSync, readFileSync } from 'node:fs';

let passed = 0;
let failed = 0;
let skipped = 0;
let failedFiles = 0;
for (const file of process.argv.slice(2)) {
  if (!existsSync(file)) continue;
  const r = JSON.parse(readFileSync(file, 'utf8'));
  passed += r.numPassedTests ?? 0;
  failed += r.numFailedTests ?? 0;
  skipped += (r.numPendingTests ?? 0) + (r.numTodoTests ?? 0);
  failedFiles += (r.testResults ?? []).filter(
    (t) => t.status === 'failed' && (t.assertionResults ?? []).length === 0,
  ).length;
}
failed += failedFiles; // a file that failed to load counts as a failure
console.log(`\ntests: ${passed} passed, ${failed} failed, ${skipped} skipped`);
process.exit(failed > 0 || passed === 0 ? 1 : 0);
