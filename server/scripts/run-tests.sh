#!/usr/bin/env bash
# The whole suite, in order; called by ./docker-free-dev.sh test once PostgreSQL is up.
set -uo pipefail
cd "$(dirname "$0")/../.."
mkdir -p tests/artifacts
status=0
step() { printf '\n\033[1;34m[plumbline test]\033[0m %s\n' "$*"; }

step "lint: ESLint, then Prettier's check (npm run lint); a finding stops the run"
npm run -s lint || { echo "lint failed: fix the findings above (npm run format rewrites layout), then run the tests again" >&2; exit 1; }

step "type-check server, shared and tests"
npx tsc -p tsconfig.json || status=1
step "type-check the client; build client and server (npm run build: dist/client, dist/server)"
(npx vue-tsc -p client/tsconfig.json && npx vite build --logLevel warn && node server/scripts/build-server.mjs) || status=1

for project in unit client api browser; do
  step "vitest: $project"
  npx vitest run --project "$project" --passWithNoTests \
    --reporter=default --reporter=json --outputFile.json="tests/artifacts/vitest-$project.json" || status=1
done

node server/scripts/test-summary.mjs tests/artifacts/vitest-*.json || status=1
exit $status
