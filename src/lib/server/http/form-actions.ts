// Form actions are answered by SvelteKit, which turns some malformed posts into 500s: the reserved
// action name "default" (`?/default`), names that are not actions but properties every object has
// (`?/constructor`, `?/toString`), and bodies `request.formData()` cannot read (text/plain, a broken
// or empty multipart body). This check runs first and answers those with a 4xx naming what is wrong.

/** Route ids of +server.ts endpoints: their POSTs are not form actions. */
const ENDPOINT_ROUTES = new Set(
	Object.keys(import.meta.glob('/src/routes/**/+server.ts')).map((file) => file.slice('/src/routes'.length, -'/+server.ts'.length) || '/')
);

const ACTION_NAME = /^[A-Za-z][A-Za-z0-9_]*$/;
const FORM_TYPES = ['application/x-www-form-urlencoded', 'multipart/form-data'];

export type ActionProblem = { status: number; message: string };

export function isFormActionPost(method: string, routeId: string | null, url: URL) {
	return method === 'POST' && routeId !== null && !ENDPOINT_ROUTES.has(routeId) && !url.pathname.startsWith('/api/');
}

/** What is wrong with a form action's name (from `?/name`), or null. */
export function actionNameProblem(url: URL): ActionProblem | null {
	const key = [...url.searchParams.keys()].find((k) => k.startsWith('/'));
	if (key === undefined) return null;
	const name = key.slice(1);
	if (name === 'default') {
		return { status: 404, message: "Form action 'default' cannot be named: post to the page without ?/default." };
	}
	if (!ACTION_NAME.test(name) || name in Object.prototype) {
		return { status: 404, message: `No form action named '${name.slice(0, 60)}' on this page.` };
	}
	return null;
}

/** What is wrong with a form action's body (its content-type, or a multipart body that cannot be read), or null. */
export async function actionBodyProblem(request: Request): Promise<ActionProblem | null> {
	const contentType = request.headers.get('content-type') ?? '';
	const type = contentType.split(';')[0].trim().toLowerCase();
	if (!FORM_TYPES.includes(type)) {
		return {
			status: 415,
			message: `Form actions take application/x-www-form-urlencoded or multipart/form-data; the content-type was ${contentType ? `'${contentType.slice(0, 80)}'` : 'missing'}.`
		};
	}
	if (type === 'multipart/form-data') {
		try {
			await request.clone().formData();
		} catch {
			return { status: 400, message: 'The multipart/form-data body could not be read: check its boundary and parts.' };
		}
	}
	return null;
}
