export const ROLES = ['admin', 'steward', 'statistician', 'chair', 'clinician'] as const;
export type Role = (typeof ROLES)[number];

export const ROLE_LABELS: Record<Role, string> = {
  admin: 'Administrator',
  steward: 'Data steward',
  statistician: 'Statistician',
  chair: 'Committee chair',
  clinician: 'Clinician',
};
