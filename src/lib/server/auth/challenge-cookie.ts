import type { Cookies } from '@sveltejs/kit';
import { CHALLENGE_MINUTES } from './second-factor';

/** The second sign-in step's token: a cookie of its own, for five minutes, __Host- over https like the session's. */
const NAME = 'ebbline_challenge';
const nameFor = (url: URL) => (url.protocol === 'https:' ? `__Host-${NAME}` : NAME);
const options = (url: URL) => ({ path: '/', httpOnly: true, sameSite: 'lax' as const, secure: url.protocol === 'https:' });

export function setChallengeCookie(cookies: Cookies, url: URL, token: string) {
	cookies.set(nameFor(url), token, { ...options(url), maxAge: CHALLENGE_MINUTES * 60 });
}

export function readChallengeCookie(cookies: Cookies, url: URL): string | undefined {
	return cookies.get(nameFor(url));
}

export function deleteChallengeCookie(cookies: Cookies, url: URL) {
	cookies.delete(nameFor(url), options(url));
}
