import { createRouter, createWebHistory } from 'vue-router';
import { pageAccess } from '@shared/access';
import { useAuthStore } from '@/stores/auth';

declare module 'vue-router' {
  interface RouteMeta {
    /** The browser tab title. (Who may open the page is in shared/src/access.ts, under the route's name.) */
    title?: string;
  }
}

export const router = createRouter({
  history: createWebHistory(),
  routes: [
    {
      path: '/sign-in',
      name: 'sign-in',
      component: () => import('@/views/SignInView.vue'),
      meta: { title: 'Sign in' },
    },
    { path: '/', name: 'home', component: () => import('@/views/HomeView.vue'), meta: { title: 'Overview' } },
    {
      path: '/account',
      name: 'account',
      component: () => import('@/views/AccountView.vue'),
      meta: { title: 'My account' },
    },
    {
      path: '/admin/accounts',
      name: 'admin-accounts',
      component: () => import('@/views/AdminUsersView.vue'),
      meta: { title: 'Accounts' },
    },
    {
      path: '/admin/audit',
      name: 'admin-audit',
      component: () => import('@/views/AdminAuditView.vue'),
      meta: { title: 'Audit trail' },
    },
    {
      path: '/runs',
      name: 'runs',
      component: () => import('@/views/RunListView.vue'),
      meta: { title: 'Validation runs' },
    },
    {
      path: '/runs/new',
      name: 'run-start',
      component: () => import('@/views/RunStartView.vue'),
      meta: { title: 'Start a validation run' },
    },
    {
      path: '/runs/compare',
      name: 'run-compare',
      component: () => import('@/views/RunCompareView.vue'),
      meta: { title: 'Compare runs' },
    },
    {
      path: '/comparisons',
      name: 'comparisons',
      component: () => import('@/views/ScoreComparisonListView.vue'),
      meta: { title: 'Score comparisons' },
    },
    {
      path: '/comparisons/:id',
      name: 'comparison',
      component: () => import('@/views/ScoreComparisonView.vue'),
      meta: { title: 'Score comparison' },
    },
    {
      path: '/runs/:id',
      name: 'run',
      component: () => import('@/views/RunView.vue'),
      meta: { title: 'Validation run' },
    },
    {
      path: '/runs/:id/report',
      name: 'run-report',
      component: () => import('@/views/RunReportView.vue'),
      meta: { title: 'Validation report' },
    },
    {
      path: '/signoff-queue',
      name: 'signoff-queue',
      component: () => import('@/views/SignoffQueueView.vue'),
      meta: { title: 'Sign-off queue' },
    },
    {
      path: '/scorecards',
      name: 'scorecards',
      component: () => import('@/views/ScoreCardListView.vue'),
      meta: { title: 'Score cards' },
    },
    {
      path: '/dev/outbox',
      name: 'dev-outbox',
      component: () => import('@/views/DevOutboxView.vue'),
      meta: { title: 'Outbox (dev)' },
    },
    {
      path: '/scores',
      name: 'scores',
      component: () => import('@/views/ScoreListView.vue'),
      meta: { title: 'Scores' },
    },
    {
      path: '/scores/:id',
      name: 'score-detail',
      component: () => import('@/views/ScoreDetailView.vue'),
      meta: { title: 'Score' },
    },
    {
      path: '/scores/:id/versions/:version/drift',
      name: 'score-drift',
      component: () => import('@/views/DriftTimelineView.vue'),
      meta: { title: 'Drift over time' },
    },
    {
      path: '/alerts',
      name: 'alerts',
      component: () => import('@/views/AlertsView.vue'),
      meta: { title: 'Drift alerts' },
    },
    {
      path: '/sample-size',
      name: 'sample-size',
      component: () => import('@/views/SampleSizePlannerView.vue'),
      meta: { title: 'Sample size planner' },
    },
    {
      path: '/scores/:id/versions/new',
      name: 'score-version-new',
      component: () => import('@/views/ScoreVersionEditView.vue'),
      meta: { title: 'New score version' },
    },
    {
      path: '/cohorts',
      name: 'cohorts',
      component: () => import('@/views/CohortListView.vue'),
      meta: { title: 'Cohorts' },
    },
    {
      path: '/cohorts/upload',
      name: 'cohort-upload',
      component: () => import('@/views/CohortUploadView.vue'),
      meta: { title: 'Upload cohort' },
    },
    {
      path: '/cohorts/:id',
      name: 'cohort',
      component: () => import('@/views/CohortDetailView.vue'),
      meta: { title: 'Cohort' },
    },
    {
      path: '/api-reference',
      name: 'api-reference',
      component: () => import('@/views/ApiReferenceView.vue'),
      meta: { title: 'API reference' },
    },
    {
      path: '/forbidden',
      name: 'forbidden',
      component: () => import('@/views/ForbiddenView.vue'),
      meta: { title: 'Not allowed' },
    },
    {
      path: '/:pathMatch(.*)*',
      name: 'not-found',
      component: () => import('@/views/NotFoundView.vue'),
      meta: { title: 'Page not found' },
    },
  ],
});

router.beforeEach((to) => {
  const auth = useAuthStore();
  const access = pageAccess(to.name);
  if (access === 'public') {
    // A signed-in user has no business on the sign-in form.
    return to.name === 'sign-in' && auth.signedIn ? { name: 'home' } : true;
  }
  if (!auth.signedIn) {
    if (auth.token) auth.logout('Your session has expired. Please sign in again.');
    return { name: 'sign-in', query: to.fullPath === '/' ? {} : { redirect: to.fullPath } };
  }
  if (access !== 'signed-in' && !access.includes(auth.role!)) {
    return { name: 'forbidden', query: { from: to.fullPath } };
  }
  return true;
});

router.afterEach((to) => {
  document.title = to.meta.title ? `${to.meta.title} · Plumbline` : 'Plumbline';
});
