export const ROLES = ['pharmacist', 'physician', 'admin'] as const;
export type Role = (typeof ROLES)[number];

export const ROLE_LABELS: Record<Role, string> = {
	pharmacist: 'Stewardship pharmacist',
	physician: 'Physician',
	admin: 'Administrator'
};
