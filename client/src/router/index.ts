import { createRouter, createWebHistory } from 'vue-router';
import type { Role } from '@shared/roles';
import { useAuthStore } from '@/stores/auth';

declare module 'vue-router' {
  interface RouteMeta {
    /** Reachable without signing in. */
    public?: boolean;
    /** Roles that may open the page; absent means every signed-in role. */
    roles?: readonly Role[];
    /** The browser tab title. */
    title?: string;
  }
}

export const router = createRouter({
  history: createWebHistory(),
  routes: [
    { path: '/sign-in', name: 'sign-in', component: () => import('@/views/SignInView.vue'), meta: { public: true, title: 'Sign in' } },
    { path: '/', name: 'home', component: () => import('@/views/HomeView.vue'), meta: { title: 'Overview' } },
    { path: '/account', name: 'account', component: () => import('@/views/AccountView.vue'), meta: { title: 'My account' } },
    {
      path: '/admin/accounts',
      name: 'admin-accounts',
      component: () => import('@/views/AdminUsersView.vue'),
      meta: { roles: ['admin'], title: 'Accounts' },
    },
    {
      path: '/admin/audit',
      name: 'admin-audit',
      component: () => import('@/views/AdminAuditView.vue'),
      meta: { roles: ['admin'], title: 'Audit trail' },
    },
    { path: '/runs', name: 'runs', component: () => import('@/views/RunListView.vue'), meta: { roles: ['steward', 'statistician', 'chair', 'admin'], title: 'Validation runs' } },
    { path: '/runs/new', name: 'run-start', component: () => import('@/views/RunStartView.vue'), meta: { roles: ['steward', 'statistician'], title: 'Start a validation run' } },
    { path: '/runs/compare', name: 'run-compare', component: () => import('@/views/RunCompareView.vue'), meta: { roles: ['statistician', 'chair', 'admin'], title: 'Compare runs' } },
    { path: '/runs/:id', name: 'run', component: () => import('@/views/RunView.vue'), meta: { roles: ['steward', 'statistician', 'chair', 'admin'], title: 'Validation run' } },
    { path: '/runs/:id/report', name: 'run-report', component: () => import('@/views/RunReportView.vue'), meta: { roles: ['statistician', 'chair', 'admin'], title: 'Validation report' } },
    { path: '/signoff-queue', name: 'signoff-queue', component: () => import('@/views/SignoffQueueView.vue'), meta: { roles: ['chair', 'admin'], title: 'Sign-off queue' } },
    { path: '/scorecards', name: 'scorecards', component: () => import('@/views/ScoreCardListView.vue'), meta: { roles: ['clinician', 'statistician', 'chair', 'admin'], title: 'Score cards' } },
    { path: '/dev/outbox', name: 'dev-outbox', component: () => import('@/views/DevOutboxView.vue'), meta: { roles: ['admin'], title: 'Outbox (dev)' } },
    { path: '/scores', name: 'scores', component: () => import('@/views/ScoreListView.vue'), meta: { roles: ['statistician', 'admin', 'steward', 'chair'], title: 'Scores' } },
    { path: '/scores/:id', name: 'score-detail', component: () => import('@/views/ScoreDetailView.vue'), meta: { roles: ['statistician', 'admin', 'steward', 'chair'], title: 'Score' } },
    { path: '/scores/:id/versions/:version/drift', name: 'score-drift', component: () => import('@/views/DriftTimelineView.vue'), meta: { roles: ['statistician', 'chair', 'admin', 'steward'], title: 'Drift over time' } },
    { path: '/alerts', name: 'alerts', component: () => import('@/views/AlertsView.vue'), meta: { roles: ['statistician', 'chair', 'admin'], title: 'Drift alerts' } },
    { path: '/sample-size', name: 'sample-size', component: () => import('@/views/SampleSizePlannerView.vue'), meta: { roles: ['admin', 'steward', 'statistician', 'chair'], title: 'Sample size planner' } },
    { path: '/scores/:id/versions/new', name: 'score-version-new', component: () => import('@/views/ScoreVersionEditView.vue'), meta: { roles: ['statistician', 'admin'], title: 'New score version' } },
    { path: '/cohorts', name: 'cohorts', component: () => import('@/views/CohortListView.vue'), meta: { roles: ['steward', 'statistician', 'chair', 'admin'], title: 'Cohorts' } },
    { path: '/cohorts/upload', name: 'cohort-upload', component: () => import('@/views/CohortUploadView.vue'), meta: { roles: ['steward', 'statistician'], title: 'Upload cohort' } },
    { path: '/cohorts/:id', name: 'cohort', component: () => import('@/views/CohortDetailView.vue'), meta: { roles: ['steward', 'statistician', 'chair', 'admin'], title: 'Cohort' } },
    { path: '/api-reference', name: 'api-reference', component: () => import('@/views/ApiReferenceView.vue'), meta: { public: true, title: 'API reference' } },
    { path: '/forbidden', name: 'forbidden', component: () => import('@/views/ForbiddenView.vue'), meta: { title: 'Not allowed' } },
    { path: '/:pathMatch(.*)*', name: 'not-found', component: () => import('@/views/NotFoundView.vue'), meta: { title: 'Page not found' } },
  ],
});

router.beforeEach((to) => {
  const auth = useAuthStore();
  if (to.meta.public) {
    // A signed-in user has no business on the sign-in form.
    return to.name === 'sign-in' && auth.signedIn ? { name: 'home' } : true;
  }
  if (!auth.signedIn) {
    if (auth.token) auth.logout('Your session has expired. Please sign in again.');
    return { name: 'sign-in', query: to.fullPath === '/' ? {} : { redirect: to.fullPath } };
  }
  const roles = to.meta.roles;
  if (roles && !roles.includes(auth.role!)) {
    return { name: 'forbidden', query: { from: to.fullPath } };
  }
  return true;
});

router.afterEach((to) => {
  document.title = to.meta.title ? `${to.meta.title} · Plumbline` : 'Plumbline';
});
