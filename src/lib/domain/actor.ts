// Who did something. Every service that writes an audit row or a flag event takes an Actor; the
// role rides along where the flag lifecycle's permissions depend on it. Pure: relative imports only.
import type { Role } from './vocabulary';

export type Actor = {
	/** the user's id; null for the system, a feed token or an unknown caller */
	actorId: string | null;
	/** what the audit log shows: the user's e-mail, "system", "feed token …" */
	actorLabel: string;
	requestId: string | null;
};

/** An actor whose role decides what it may do (the flag lifecycle); the system acts as 'system'. */
export type RoleActor = Actor & { role: Role | 'system' };

/** A signed-in person acting: services that send mail in their name need the e-mail and display name. */
export type ActingUser = { id: string; email: string; displayName: string; role: Role; requestId: string | null };

export const SYSTEM_ACTOR: Actor = { actorId: null, actorLabel: 'system', requestId: null };
