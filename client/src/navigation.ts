// The navigation drawer's items, in order. Later features append their pages here; each item lists
// the roles that see it (the server still checks every request — hiding is not protection).
import type { Role } from '@shared/roles';
import { ROLES } from '@shared/roles';

export interface NavigationItem {
  title: string;
  icon: string; // an mdi-* icon name
  to: string;
  roles: readonly Role[];
}

export const navigation: NavigationItem[] = [
  { title: 'Overview', icon: 'mdi-home-outline', to: '/', roles: ROLES },
  { title: 'Accounts', icon: 'mdi-account-multiple-outline', to: '/admin/accounts', roles: ['admin'] },
  { title: 'Audit trail', icon: 'mdi-clipboard-text-clock-outline', to: '/admin/audit', roles: ['admin'] },
  { title: 'My account', icon: 'mdi-account-key-outline', to: '/account', roles: ROLES },
];

export const navigationFor = (role: Role): NavigationItem[] => navigation.filter((item) => item.roles.includes(role));
