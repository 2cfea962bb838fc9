import { error } from '@sveltejs/kit';
import { isRouteSwitchedOff, requirePageRole } from '$lib/server/auth/access';
import { config } from '$lib/server/config';
import { mailbox } from '$lib/server/mail';
import { formatDateTime } from '$lib/server/recommendations';
import type { PageServerLoad } from './$types';

// Present only with the development flag EBBLINE_DEV_MAILBOX=on (set by `npm start` and `npm test`,
// never by `npm run serve`): without it the page answers 404 to everyone, administrators included.
// With the flag but no local test mailbox (EBBLINE_MAILBOX_DIR) there is nothing to show either.
export const load: PageServerLoad = async ({ locals, url }) => {
	if (isRouteSwitchedOff('/dev/mail')) error(404, 'Page not found.');
	requirePageRole(locals, url, 'admin');
	const dir = config.mailboxDir;
	if (!dir) error(404, 'The local test mailbox is not in use: Ebbline is sending e-mail through the hospital relay (SMTP_URL).');
	const messages = await mailbox.listMessages(dir);
	const wanted = url.searchParams.get('m') ?? messages[0]?.id ?? null;
	const selected = wanted ? await mailbox.readMessage(dir, wanted) : null;
	if (wanted && url.searchParams.has('m') && !selected) error(404, 'No message with that id in the test mailbox.');
	return {
		messages: messages.map((m) => ({ id: m.id, subject: m.subject, to: m.to, at: formatDateTime(new Date(m.receivedAt)) })),
		selected: selected && {
			id: selected.id,
			subject: selected.subject,
			from: selected.from,
			to: selected.to,
			at: formatDateTime(new Date(selected.receivedAt)),
			messageId: selected.messageId,
			html: selected.html,
			text: selected.text,
			links: mailbox.linksIn(selected.text)
		}
	};
};
