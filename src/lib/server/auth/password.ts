import { hash, verify } from '@node-rs/argon2';

/**
 * argon2id with RFC 9106's second recommended option (section 4, for when much less than 2 GiB
 * of memory is available): 3 passes over 64 MiB in 4 lanes, a 128-bit salt and a 256-bit tag.
 * About a tenth of a second per sign-in on a two-core server. (The library's default algorithm is
 * argon2id and its salts are 16 bytes.)
 */
export const ARGON2_OPTIONS = { memoryCost: 65536, timeCost: 3, parallelism: 4, outputLen: 32 } as const;

export function hashPassword(password: string): Promise<string> {
	return hash(password, ARGON2_OPTIONS);
}

export async function verifyPassword(passwordHash: string, password: string): Promise<boolean> {
	try {
		return await verify(passwordHash, password);
	} catch {
		return false;
	}
}

/**
 * True when a stored hash was made with another algorithm or weaker parameters than today's
 * (e.g. the earlier 19 MiB, 2-pass setting): the next successful sign-in stores a new hash.
 */
export function needsRehash(passwordHash: string): boolean {
	const match = /^\$(argon2(?:id|i|d))\$v=(\d+)\$m=(\d+),t=(\d+),p=(\d+)\$/.exec(passwordHash);
	if (!match) return true;
	const [, algorithm, version, m, t, p] = match;
	return (
		algorithm !== 'argon2id' ||
		Number(version) !== 19 ||
		Number(m) < ARGON2_OPTIONS.memoryCost ||
		Number(t) < ARGON2_OPTIONS.timeCost ||
		Number(p) < ARGON2_OPTIONS.parallelism
	);
}
