/** Headers every response carries: pages, endpoints, errors and redirects alike. */
const ALWAYS: Record<string, string> = {
	'x-content-type-options': 'nosniff',
	// same-origin, not no-referrer: under no-referrer a browser sends `Origin: null` with a form posted
	// without script (the header's Sign out), which the CSRF check must refuse; other sites still get no
	// referrer, so no address (an answer link's token, a patient id) leaves the site
	'referrer-policy': 'same-origin',
	'x-frame-options': 'DENY',
	'permissions-policy': 'camera=(), microphone=(), geolocation=()',
	'cross-origin-opener-policy': 'same-origin'
};

/**
 * Served over https (ORIGIN is https), browsers are told to use https only for a year. No
 * includeSubDomains: other hosts under the hospital's domain are not Ebbline's to decide.
 */
export const HSTS = 'max-age=31536000';

export function applySecurityHeaders(headers: Headers, url: URL, signedIn: boolean) {
	for (const [name, value] of Object.entries(ALWAYS)) headers.set(name, value);
	if (url.protocol === 'https:') headers.set('strict-transport-security', HSTS);
	// nothing a signed-in person sees is kept by the browser or a proxy
	if (signedIn) headers.set('cache-control', 'no-store');
}
