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
			/** set by the access guard: the root layout answers with the 403 page */
			denied: boolean;
			/** set by the session handle: the signed-in user has an enrolled second factor */
			secondFactor?: boolean;
			/** set by handleError when the route failed because the database could not be reached */
			databaseUnavailable?: boolean;
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
