import type { Role } from '$lib/server/db/schema';

declare global {
	namespace App {
		interface SessionUser {
			id: string;
			email: string;
			displayName: string;
			role: Role;
		}
		interface Locals {
			requestId: string;
			user: SessionUser | null;
			sessionId: string | null;
			/** set when the request carried a valid feed bearer token */
			feedToken: { id: string; name: string } | null;
		}
		interface Error {
			message: string;
			requestId?: string;
		}
		// interface PageData {}
		// interface PageState {}
		// interface Platform {}
	}
}

export {};
