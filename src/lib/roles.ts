import { ROLES, type Role } from './domain/vocabulary';

export { ROLES, type Role };

export const ROLE_LABELS: Record<Role, string> = {
	pharmacist: 'Stewardship pharmacist',
	physician: 'Physician',
	admin: 'Administrator'
};
