// The whole API at a glance: every route, who may call it, and the schema its input must match.
// tests/api/accessControl.test.ts walks this table; a route missing here is not mounted at all.
import { rateLimit } from 'express-rate-limit';
import { auditQuery } from '@shared/audit';
import { createRunRequest, runCompareQuery, runListQuery } from '@shared/runs';
import { changePasswordRequest, createUserRequest, idParam, loginRequest, resetPasswordRequest, updateUserRequest } from '@shared/auth';
import { commentRequest, reviewRequest, revokeRequest, signoffRequest, versionIdParam } from '@shared/governance';
import { cohortListQuery, cohortRowsQuery, commitRequest, mappingListQuery, mappingRequest, pageQuery, saveMappingRequest, uploadQuery, uuidParam, versionParams } from '@shared/cohorts';
import { createScoreRequest, createScoreVersionRequest, scoreIdParam, scoreVersionParams, updateScoreRequest } from '@shared/scores';
import { config } from '../../platform/config';
import * as audit from './audit';
import * as auth from './auth';
import { alertAckBody, alertBulkAckBody, alertListQuery, alertRuleBody, driftRunChoice, recalibrationBody, sampleSizeQuery } from '@shared/drift';
import * as cohorts from './cohorts';
import type { RouteDef } from './define';
import * as drift from './drift';
import * as governance from './governance';
import * as health from './health';
import { serveOpenApi } from './openapi';
import packageJson from '../../../../package.json';
import * as runs from './runs';
import * as scores from './scores';
import * as users from './users';

// The named role sets live in shared/src/access.ts, where the client's pages and menu take theirs from.
import { ADMIN, ALERT_ACKNOWLEDGERS, CARD_READERS, COHORT_READERS, COHORT_WRITERS, DRIFT_READERS, REPRODUCERS, RESULT_READERS, RUN_STARTERS, RUN_TEAM, SCORE_READERS, SCORE_WRITERS, SIGNERS, SIGNOFF_QUEUE_READERS, STATISTICIAN } from '@shared/access';

// Per-IP limit on failed sign-ins; the per-account lock-out lives in domain/accounts/users.ts.
const loginLimiter = rateLimit({
  windowMs: config.loginRateLimit.windowMs,
  limit: config.loginRateLimit.maxPerIp,
  skipSuccessfulRequests: true,
  standardHeaders: 'draft-7',
  legacyHeaders: false,
  message: { error: 'too many failed sign-ins from this address; wait and try again' },
});

export const routes: RouteDef[] = [
  { method: 'get', path: '/api/health', access: 'public', summary: 'service, database and background queue status', handler: health.health },
  { method: 'get', path: '/api/openapi.json', access: 'public', summary: 'this API described as OpenAPI 3.1 (generated from this table)', handler: serveOpenApi(() => routes, packageJson.version) },
  { method: 'get', path: '/api/metrics', access: 'public', summary: 'Prometheus metrics (scrape token when PLUMBLINE_METRICS_TOKEN is set)', handler: health.metrics },

  { method: 'post', path: '/api/auth/login', access: 'public', summary: 'sign in', body: loginRequest, before: [loginLimiter], handler: auth.login },
  { method: 'get', path: '/api/auth/me', access: 'signed-in', summary: 'the signed-in account', handler: auth.me },
  { method: 'post', path: '/api/auth/password', access: 'signed-in', summary: 'change own password', body: changePasswordRequest, handler: auth.changePassword },

  { method: 'get', path: '/api/users', access: ADMIN, summary: 'list accounts', handler: users.list },
  { method: 'post', path: '/api/users', access: ADMIN, summary: 'create an account', body: createUserRequest, handler: users.create },
  { method: 'patch', path: '/api/users/:id', access: ADMIN, summary: 'change name, role or active flag', params: idParam, body: updateUserRequest, handler: users.update },
  { method: 'post', path: '/api/users/:id/password', access: ADMIN, summary: 'reset a password', params: idParam, body: resetPasswordRequest, handler: users.resetPassword },

  { method: 'get', path: '/api/audit', access: ADMIN, summary: 'list and filter the audit trail', query: auditQuery, handler: audit.list },
  { method: 'get', path: '/api/audit/verify', access: ADMIN, summary: 'check the audit hash chain', handler: audit.verify },
  { method: 'get', path: '/api/audit.csv', access: ADMIN, summary: 'download the filtered audit trail as CSV', query: auditQuery, handler: audit.csv },

  // Validation runs. /options and /compare before /:id so the literal paths are not taken for an id.
  { method: 'post', path: '/api/runs', access: RUN_STARTERS, summary: 'queue a validation run', body: createRunRequest, handler: runs.create },
  { method: 'get', path: '/api/runs', access: RUN_TEAM, summary: 'list validation runs with review and sign-off status (filter by score, status, stage; search; paged)', query: runListQuery, handler: runs.list },
  { method: 'get', path: '/api/runs/options', access: RUN_STARTERS, summary: 'score and cohort versions a run may use', handler: runs.options },
  { method: 'get', path: '/api/runs/compare', access: RESULT_READERS, summary: 'compare the headline figures of two runs', query: runCompareQuery, handler: runs.compare },
  { method: 'get', path: '/api/runs/:id', access: RUN_TEAM, summary: 'one validation run with its results', params: idParam, handler: runs.get },
  { method: 'post', path: '/api/runs/:id/reproduce', access: REPRODUCERS, summary: 're-compute a completed run and compare its hash', params: idParam, handler: runs.reproduce },
  { method: 'get', path: '/api/runs/:id/review', access: RUN_TEAM, summary: 'reviews, signature manifest and next allowed acts on a run', params: idParam, handler: governance.getReview },
  { method: 'post', path: '/api/runs/:id/review', access: STATISTICIAN, summary: 'record or revise the review of a completed run', params: idParam, body: reviewRequest, handler: governance.postReview },
  { method: 'post', path: '/api/runs/:id/signoff', access: SIGNERS, summary: 'sign: approve for clinical use or return (password re-entered)', params: idParam, body: signoffRequest, handler: governance.signoff },
  { method: 'post', path: '/api/score-versions/:id/revoke', access: SIGNERS, summary: 'sign: revoke a clinical-use approval (password re-entered)', params: idParam, body: revokeRequest, handler: governance.revoke },
  { method: 'get', path: '/api/runs/:id/comments', access: RUN_TEAM, summary: 'the discussion thread of a run', params: idParam, handler: governance.listComments },
  { method: 'post', path: '/api/runs/:id/comments', access: RUN_TEAM, summary: 'add a comment to a run', params: idParam, body: commentRequest, handler: governance.addComment },
  { method: 'get', path: '/api/signoff-queue', access: SIGNOFF_QUEUE_READERS, summary: 'reviewed runs awaiting the committee decision', handler: governance.queue },
  { method: 'get', path: '/api/scorecards', access: CARD_READERS, summary: 'score cards of approved score versions', handler: governance.scorecards },
  { method: 'get', path: '/api/scorecards/:versionId', access: CARD_READERS, summary: 'the score card of one approved version', params: versionIdParam, handler: governance.scorecard },
  { method: 'get', path: '/api/runs/:id/report', access: RESULT_READERS, summary: 'the validation report bundle of a run', params: idParam, handler: governance.report },
  { method: 'get', path: '/api/dev/outbox', access: ADMIN, summary: 'development only: e-mails received by the local fake SMTP server', handler: governance.devOutbox },
  // Cohorts: uploads are screened, mapped, checked, then stored in one transaction (domain/cohorts/uploads.ts).
  { method: 'post', path: '/api/cohorts', access: COHORT_WRITERS, summary: 'upload a CSV (multipart, field "file"); screened for identifiers before anything is kept', multipartFile: 'file', before: [cohorts.receiveFile], handler: cohorts.createUpload },
  { method: 'get', path: '/api/cohorts', access: COHORT_READERS, summary: 'list cohorts (paged, sorted, searched on the server)', query: cohortListQuery, handler: cohorts.listCohorts },
  { method: 'get', path: '/api/cohorts/:id', access: COHORT_READERS, summary: 'a cohort with its versions', params: uuidParam, handler: cohorts.getCohort },
  { method: 'get', path: '/api/cohorts/:id/versions/:version', access: COHORT_READERS, summary: 'one cohort version with its column summary', params: versionParams, handler: cohorts.getVersion },
  { method: 'get', path: '/api/cohorts/:id/versions/:version/rows', access: COHORT_READERS, summary: 'rows of a cohort version (paged, sorted, searched)', params: versionParams, query: cohortRowsQuery, handler: cohorts.listRows },
  { method: 'get', path: '/api/upload-score-versions', access: COHORT_WRITERS, summary: 'score versions a cohort can be uploaded against', handler: cohorts.scoreVersionChoices },
  { method: 'get', path: '/api/uploads', access: COHORT_WRITERS, summary: 'my unfinished uploads', handler: cohorts.listUploads },
  { method: 'get', path: '/api/uploads/:id', access: COHORT_WRITERS, summary: 'an upload: status, progress, screening warnings, check results (waitSeconds: while checking, answer when it ends)', params: uuidParam, query: uploadQuery, handler: cohorts.getUpload },
  { method: 'post', path: '/api/uploads/:id/mapping', access: COHORT_WRITERS, summary: 'map file columns and start the row checks (accepted rows are staged in PostgreSQL by binary COPY)', params: uuidParam, body: mappingRequest, handler: cohorts.postMapping },
  { method: 'get', path: '/api/uploads/:id/rejections', access: COHORT_WRITERS, summary: 'rejected rows (paged)', params: uuidParam, query: pageQuery, handler: cohorts.listRejections },
  { method: 'get', path: '/api/uploads/:id/rejections.csv', access: COHORT_WRITERS, summary: 'rejected rows as CSV (formula-looking cells neutralised)', params: uuidParam, handler: cohorts.rejectionsCsv },
  { method: 'post', path: '/api/uploads/:id/commit', access: COHORT_WRITERS, summary: 'store the checked rows as a new cohort version (one transaction)', params: uuidParam, body: commitRequest, handler: cohorts.commit },
  { method: 'post', path: '/api/uploads/:id/discard', access: COHORT_WRITERS, summary: 'discard an upload and its temp file', params: uuidParam, handler: cohorts.discard },
  { method: 'get', path: '/api/mappings', access: COHORT_WRITERS, summary: 'saved column mappings', query: mappingListQuery, handler: cohorts.listMappings },
  { method: 'post', path: '/api/mappings', access: COHORT_WRITERS, summary: 'save a column mapping for reuse', body: saveMappingRequest, handler: cohorts.saveMapping },
  { method: 'get', path: '/api/scores', access: SCORE_READERS, summary: 'list scores with their version counts', handler: scores.list },
  { method: 'post', path: '/api/scores', access: SCORE_WRITERS, summary: 'register a score (its description; formulas are versions)', body: createScoreRequest, handler: scores.create },
  { method: 'get', path: '/api/scores/:id', access: SCORE_READERS, summary: 'a score with its version history', params: scoreIdParam, handler: scores.get },
  { method: 'patch', path: '/api/scores/:id', access: SCORE_WRITERS, summary: 'change the description of a score', params: scoreIdParam, body: updateScoreRequest, handler: scores.update },
  { method: 'get', path: '/api/scores/:id/versions', access: SCORE_READERS, summary: 'version history, newest first', params: scoreIdParam, handler: scores.listVersions },
  { method: 'post', path: '/api/scores/:id/versions', access: SCORE_WRITERS, summary: 'add the next version (form body or an imported --model file)', params: scoreIdParam, body: createScoreVersionRequest, handler: scores.createVersion },
  { method: 'get', path: '/api/scores/:id/versions/:version', access: SCORE_READERS, summary: 'one score version', params: scoreVersionParams, handler: scores.getVersion },
  { method: 'patch', path: '/api/scores/:id/versions/:version', access: SCORE_WRITERS, summary: 'always refused (409): versions are never edited; create the next one', params: scoreVersionParams, handler: scores.editVersion },
  { method: 'get', path: '/api/scores/:id/versions/:version/template.csv', access: SCORE_READERS, summary: 'a CSV header of the columns a cohort file needs for this score version', params: scoreVersionParams, handler: scores.cohortTemplate },
  { method: 'get', path: '/api/scores/:id/versions/:version/export', access: SCORE_READERS, summary: 'download the formula as a --model JSON file', params: scoreVersionParams, handler: scores.exportVersion },

  { method: 'get', path: '/api/sample-size', access: RUN_TEAM, summary: 'sample-size planner for external validation (Riley et al. 2021)', query: sampleSizeQuery, handler: drift.sampleSize },
  // Drift monitoring and model updating (domain/drift/: timeline.ts, alerts.ts, alertRules.ts, recalibration.ts).
  { method: 'get', path: '/api/scores/:id/versions/:version/drift', access: DRIFT_READERS, summary: 'drift timeline of a score version: per-period figures, funnel limits, CUSUM, O − E, alerts', params: scoreVersionParams, handler: drift.timeline },
  { method: 'put', path: '/api/scores/:id/versions/:version/drift/runs', access: STATISTICIAN, summary: 'choose which run of a cohort version the drift timeline takes (runId null: the newest completed)', params: scoreVersionParams, body: driftRunChoice, handler: drift.chooseRun },
  { method: 'get', path: '/api/alerts', access: RESULT_READERS, summary: 'drift alerts, open ones first (filter by score)', query: alertListQuery, handler: drift.listAlerts },
  { method: 'post', path: '/api/alerts/acknowledge', access: ALERT_ACKNOWLEDGERS, summary: 'acknowledge several open drift alerts with one note (all or none)', body: alertBulkAckBody, handler: drift.acknowledgeMany },
  { method: 'post', path: '/api/alerts/:id/acknowledge', access: ALERT_ACKNOWLEDGERS, summary: 'acknowledge a drift alert with a note (once)', params: idParam, body: alertAckBody, handler: drift.acknowledge },
  { method: 'get', path: '/api/scores/:id/alert-rules', access: RESULT_READERS, summary: 'drift alert rules of a score', params: scoreIdParam, handler: drift.listRules },
  { method: 'post', path: '/api/scores/:id/alert-rules', access: STATISTICIAN, summary: 'add a drift alert rule to a score', params: scoreIdParam, body: alertRuleBody, handler: drift.createRule },
  { method: 'post', path: '/api/runs/:id/recalibration-preview', access: STATISTICIAN, summary: 'fit an intercept update or logistic recalibration on a run (nothing stored)', params: idParam, body: recalibrationBody, handler: drift.recalibrationPreview },
  { method: 'post', path: '/api/runs/:id/recalibrate', access: STATISTICIAN, summary: 'propose a recalibrated draft score version from a completed run', params: idParam, body: recalibrationBody, handler: drift.recalibrate },
];
