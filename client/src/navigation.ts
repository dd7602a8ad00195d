// The navigation drawer's items, in order. Later features append their pages here; each item lists
// the roles that see it (the server still checks every request — hiding is not protection).
import type { Role } from '@shared/roles';
import { ROLES } from '@shared/roles';

export interface NavigationItem {
  title: string;
  icon: string; // an mdi-* icon name
  to: string;
  roles: readonly Role[];
  /** Roles whose menu starts with this item (their most frequent task). */
  leads?: readonly Role[];
}

export const navigation: NavigationItem[] = [
  { title: 'Overview', icon: 'mdi-home-outline', to: '/', roles: ROLES },
  { title: 'Scores', icon: 'mdi-function-variant', to: '/scores', roles: ['statistician', 'admin', 'steward', 'chair'] },
  { title: 'Validation runs', icon: 'mdi-chart-bell-curve-cumulative', to: '/runs', roles: ['steward', 'statistician', 'chair', 'admin'] },
  { title: 'Sign-off queue', icon: 'mdi-draw-pen', to: '/signoff-queue', roles: ['chair', 'admin'] },
  { title: 'Alerts', icon: 'mdi-bell-alert-outline', to: '/alerts', roles: ['statistician', 'chair', 'admin'] },
  { title: 'Sample size', icon: 'mdi-calculator-variant-outline', to: '/sample-size', roles: ['admin', 'steward', 'statistician', 'chair'] },
  { title: 'Score cards', icon: 'mdi-card-account-details-outline', to: '/scorecards', roles: ['clinician', 'statistician', 'chair', 'admin'] },
  { title: 'Accounts', icon: 'mdi-account-multiple-outline', to: '/admin/accounts', roles: ['admin'] },
  { title: 'Audit trail', icon: 'mdi-clipboard-text-clock-outline', to: '/admin/audit', roles: ['admin'] },
  { title: 'Outbox (dev)', icon: 'mdi-email-fast-outline', to: '/dev/outbox', roles: ['admin'] },
  { title: 'Cohorts', icon: 'mdi-table-multiple', to: '/cohorts', roles: ['steward', 'statistician', 'chair', 'admin'] },
  { title: 'Upload cohort', icon: 'mdi-upload-outline', to: '/cohorts/upload', roles: ['steward', 'statistician'], leads: ['steward'] },
  { title: 'My account', icon: 'mdi-account-key-outline', to: '/account', roles: ROLES },
];

export function navigationFor(role: Role): NavigationItem[] {
  const items = navigation.filter((item) => item.roles.includes(role));
  const leading = items.filter((item) => item.leads?.includes(role));
  return [...leading, ...items.filter((item) => !leading.includes(item))];
}
