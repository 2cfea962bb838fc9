import type { Role } from './roles';

/** `devMailbox`: shown only while the development mailbox is switched on (EBBLINE_DEV_MAILBOX=on). */
export type NavItem = { href: string; label: string; roles: readonly Role[]; devMailbox?: true };

/** The shell's navigation, by role. Add a page here when it is reachable from the top bar. */
export const navItems: NavItem[] = [
	{ href: '/', label: 'Home', roles: ['pharmacist', 'physician', 'admin'] },
	{ href: '/board', label: 'Triage board', roles: ['pharmacist', 'admin'] },
	{ href: '/reports', label: 'Reports', roles: ['pharmacist', 'admin'] },
	{ href: '/recommendations', label: 'My recommendations', roles: ['physician'] },
	{ href: '/feed/upload', label: 'Upload', roles: ['pharmacist', 'admin'] },
	{ href: '/admin/users', label: 'Users', roles: ['admin'] },
	{ href: '/admin/rules', label: 'Rules', roles: ['admin'] },
	{ href: '/admin/agents', label: 'Agents', roles: ['admin'] },
	{ href: '/admin/quarantine', label: 'Quarantine', roles: ['admin'] },
	{ href: '/admin/feed-tokens', label: 'Feed tokens', roles: ['admin'] },
	{ href: '/admin/mail', label: 'Failed e-mail', roles: ['admin'] },
	{ href: '/admin/audit', label: 'Audit log', roles: ['admin'] },
	{ href: '/admin/access', label: 'Access log', roles: ['admin'] },
	{ href: '/admin/settings', label: 'Settings', roles: ['admin'] },
	{ href: '/dev/mail', label: 'Mailbox', roles: ['admin'], devMailbox: true }
];

export function navFor(role: Role, { devMailbox = false }: { devMailbox?: boolean } = {}) {
	return navItems.filter((item) => item.roles.includes(role) && (devMailbox || !item.devMailbox));
}
