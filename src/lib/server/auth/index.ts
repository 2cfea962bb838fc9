// Who someone is and what they may reach: sessions, passwords, the second factor, sign-in throttling, the route access table, users, account set-up and feed tokens.
// The route access table (./access) is imported as $lib/server/auth/access, not from here: it reads the
// current request through $app/server, which exists only inside the SvelteKit server, and this index is
// also loaded by the workers and scripts.
export * from './session';
export * as sessions from './session';
export * from './password';
export * from './throttle';
export * as throttle from './throttle';
export * as users from './users';
export * as secondFactor from './second-factor';
export * from './account-setup';
export * as feedTokens from './feed-tokens';
export * from './tokens';
export * from './challenge-cookie';
