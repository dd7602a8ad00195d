// Who may do what, in one place: the named role sets the API's route table grants (server/src/http/routes/table.ts imports
// them), and each page of the client with the access that opens it and the API routes it calls. The client's router
// guard, its menu and its buttons are derived from here; tests/unit/shared/pageAccess.test.ts fails when a page's roles
// could not call the API routes that page needs, and tests/api/accessControl.test.ts probes every route with every role.
import type { Role } from './roles';
import { ROLES } from './roles';

export type RoleSet = readonly Role[];

export const EVERYONE: RoleSet = ROLES;
export const ADMIN = ['admin'] as const satisfies RoleSet;
// The score registry: statisticians and admins write; stewards and the chair read; clinicians read score cards elsewhere.
export const SCORE_WRITERS = ['statistician', 'admin'] as const satisfies RoleSet;
export const SCORE_READERS = ['statistician', 'admin', 'steward', 'chair'] as const satisfies RoleSet;
export const COHORT_WRITERS = ['steward', 'statistician'] as const satisfies RoleSet;
export const COHORT_READERS = ['steward', 'statistician', 'chair', 'admin'] as const satisfies RoleSet;
// Everyone but clinicians works on runs; clinicians read score cards only.
export const RUN_TEAM = ['admin', 'steward', 'statistician', 'chair'] as const satisfies RoleSet;
/** Who starts validation runs: the people who bring the cohorts. */
export const RUN_STARTERS = ['steward', 'statistician'] as const satisfies RoleSet;
/** Who reads results beyond one run: comparisons, the validation report, drift alerts and their rules. */
export const RESULT_READERS = ['statistician', 'chair', 'admin'] as const satisfies RoleSet;
/** Who re-computes a completed run to compare its hash. */
export const REPRODUCERS = ['statistician', 'admin'] as const satisfies RoleSet;
/** Who reviews runs and updates models: drift run choice, alert rules, recalibration. */
export const STATISTICIAN = ['statistician'] as const satisfies RoleSet;
/** Who signs: approvals, returns and revocations (password re-entered). */
export const SIGNERS = ['chair'] as const satisfies RoleSet;
/** Who sees the runs awaiting the committee decision (the admin follows the queue without signing). */
export const SIGNOFF_QUEUE_READERS = ['chair', 'admin'] as const satisfies RoleSet;
export const CARD_READERS = ['clinician', 'statistician', 'chair', 'admin'] as const satisfies RoleSet;
export const DRIFT_READERS = ['statistician', 'chair', 'admin', 'steward'] as const satisfies RoleSet;
export const ALERT_ACKNOWLEDGERS = ['statistician', 'chair'] as const satisfies RoleSet;

/** Every named set, for printing the access matrix with names and for tests. */
export const ROLE_SETS = {
  EVERYONE,
  ADMIN,
  SCORE_WRITERS,
  SCORE_READERS,
  COHORT_WRITERS,
  COHORT_READERS,
  RUN_TEAM,
  RUN_STARTERS,
  RESULT_READERS,
  REPRODUCERS,
  STATISTICIAN,
  SIGNERS,
  SIGNOFF_QUEUE_READERS,
  CARD_READERS,
  DRIFT_READERS,
  ALERT_ACKNOWLEDGERS,
} as const satisfies Record<string, RoleSet>;

/** Whether a role belongs to a set; no role (signed out) belongs to none. */
export function allows(set: RoleSet, role: Role | null | undefined): boolean {
  return !!role && set.includes(role);
}

export type PageAccess = 'public' | 'signed-in' | RoleSet;

export interface PageRule {
  access: PageAccess;
  /** The API routes ("METHOD /api/path" as in the route table) the page calls for everyone it opens for. */
  api: readonly string[];
}

/** Every page of the client, keyed by its route name in client/src/router/index.ts. */
export const PAGES = {
  'sign-in': { access: 'public', api: ['POST /api/auth/login'] },
  'api-reference': { access: 'public', api: ['GET /api/openapi.json'] },
  home: { access: 'signed-in', api: ['GET /api/auth/me'] },
  account: { access: 'signed-in', api: ['POST /api/auth/password'] },
  forbidden: { access: 'signed-in', api: [] },
  'not-found': { access: 'signed-in', api: [] },
  'admin-accounts': {
    access: ADMIN,
    api: ['GET /api/users', 'POST /api/users', 'PATCH /api/users/:id', 'POST /api/users/:id/password'],
  },
  'admin-audit': { access: ADMIN, api: ['GET /api/audit', 'GET /api/audit/verify', 'GET /api/audit.csv'] },
  runs: { access: RUN_TEAM, api: ['GET /api/runs', 'GET /api/scores'] },
  'run-start': { access: RUN_STARTERS, api: ['GET /api/runs/options', 'POST /api/runs'] },
  'run-compare': { access: RESULT_READERS, api: ['GET /api/runs/compare'] },
  run: {
    access: RUN_TEAM,
    api: ['GET /api/runs/:id', 'GET /api/runs/:id/review', 'GET /api/runs/:id/comments', 'POST /api/runs/:id/comments'],
  },
  'run-report': { access: RESULT_READERS, api: ['GET /api/runs/:id/report'] },
  // Score comparisons (two scores on the same patients); the start form on the list page shows to statisticians.
  comparisons: { access: RESULT_READERS, api: ['GET /api/comparisons'] },
  comparison: { access: RESULT_READERS, api: ['GET /api/comparisons/:id'] },
  'signoff-queue': { access: SIGNOFF_QUEUE_READERS, api: ['GET /api/signoff-queue'] },
  scorecards: { access: CARD_READERS, api: ['GET /api/scorecards'] },
  'dev-outbox': { access: ADMIN, api: ['GET /api/dev/outbox'] },
  scores: { access: SCORE_READERS, api: ['GET /api/scores'] },
  'score-detail': {
    access: SCORE_READERS,
    api: [
      'GET /api/scores/:id',
      'GET /api/scores/:id/versions/:version/template.csv',
      'GET /api/scores/:id/versions/:version/export',
    ],
  },
  'score-drift': { access: DRIFT_READERS, api: ['GET /api/scores/:id/versions/:version/drift'] },
  alerts: { access: RESULT_READERS, api: ['GET /api/alerts'] },
  'sample-size': { access: RUN_TEAM, api: ['GET /api/sample-size'] },
  'score-version-new': { access: SCORE_WRITERS, api: ['POST /api/scores/:id/versions', 'GET /api/scores/:id'] },
  cohorts: { access: COHORT_READERS, api: ['GET /api/cohorts'] },
  'cohort-upload': {
    access: COHORT_WRITERS,
    api: [
      'GET /api/upload-score-versions',
      'POST /api/cohorts',
      'GET /api/uploads/:id',
      'POST /api/uploads/:id/mapping',
      'POST /api/uploads/:id/commit',
    ],
  },
  cohort: {
    access: COHORT_READERS,
    api: [
      'GET /api/cohorts/:id',
      'GET /api/cohorts/:id/versions/:version',
      'GET /api/cohorts/:id/versions/:version/rows',
    ],
  },
} as const satisfies Record<string, PageRule>;

export type PageName = keyof typeof PAGES;

/** The roles a page opens for (every role for pages open to anyone signed in or to the public). */
export function pageRoles(page: PageName): RoleSet {
  const access: PageAccess = PAGES[page].access;
  return typeof access === 'string' ? EVERYONE : access;
}

/** Who may open the page a client route names; a route without a rule here is for no role at all. */
export function pageAccess(routeName: unknown): PageAccess {
  return typeof routeName === 'string' && Object.hasOwn(PAGES, routeName) ? PAGES[routeName as PageName].access : [];
}

/** The page each role's menu starts with (its most frequent task); the others start with the overview. */
export const FIRST_MENU_PAGE: Partial<Record<Role, PageName>> = { steward: 'cohort-upload' };
