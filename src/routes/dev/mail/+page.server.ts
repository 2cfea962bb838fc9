import { error } from '@sveltejs/kit';
import { requirePageRole } from '$lib/server/auth/access';
import { config } from '$lib/server/config';
import { mailbox } from '$lib/server/mail';
import { formatDateTime } from '$lib/server/recommendations';
import type { PageServerLoad } from './$types';

// Present only while Ebbline sends to the local test mailbox (EBBLINE_MAILBOX_DIR, set by `npm start`
// and `npm test`); with a real relay there is nothing to show and the page answers 404.
export const load: PageServerLoad = async ({ locals, url }) => {
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
