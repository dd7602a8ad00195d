// The navigation drawer's items, in order. Later features append their pages here; each item names its page, and the
// roles that see it are that page's in shared/src/access.ts (the server still checks every request — hiding is not
// protection).
import { FIRST_MENU_PAGE, pageRoles, type PageName } from '@shared/access';
import type { Role } from '@shared/roles';

export interface NavigationItem {
  title: string;
  icon: string; // an mdi-* icon name
  to: string;
  page: PageName;
  roles: readonly Role[];
}

const item = (page: PageName, to: string, title: string, icon: string): NavigationItem => ({
  title,
  icon,
  to,
  page,
  roles: pageRoles(page),
});

export const navigation: NavigationItem[] = [
  item('home', '/', 'Overview', 'mdi-home-outline'),
  item('scores', '/scores', 'Scores', 'mdi-function-variant'),
  item('runs', '/runs', 'Validation runs', 'mdi-chart-bell-curve-cumulative'),
  item('comparisons', '/comparisons', 'Score comparisons', 'mdi-scale-balance'),
  item('signoff-queue', '/signoff-queue', 'Sign-off queue', 'mdi-draw-pen'),
  item('alerts', '/alerts', 'Alerts', 'mdi-bell-alert-outline'),
  item('sample-size', '/sample-size', 'Sample size', 'mdi-calculator-variant-outline'),
  item('scorecards', '/scorecards', 'Score cards', 'mdi-card-account-details-outline'),
  item('admin-accounts', '/admin/accounts', 'Accounts', 'mdi-account-multiple-outline'),
  item('admin-audit', '/admin/audit', 'Audit trail', 'mdi-clipboard-text-clock-outline'),
  item('dev-outbox', '/dev/outbox', 'Outbox (dev)', 'mdi-email-fast-outline'),
  item('cohorts', '/cohorts', 'Cohorts', 'mdi-table-multiple'),
  item('cohort-upload', '/cohorts/upload', 'Upload cohort', 'mdi-upload-outline'),
  item('account', '/account', 'My account', 'mdi-account-key-outline'),
];

export function navigationFor(role: Role): NavigationItem[] {
  const items = navigation.filter((i) => i.roles.includes(role));
  const leading = items.filter((i) => i.page === FIRST_MENU_PAGE[role]);
  return [...leading, ...items.filter((i) => !leading.includes(i))];
}
