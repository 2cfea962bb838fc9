// One simple, phone-friendly layout for every e-mail Ebbline sends: a single column at most 600 px
// wide, inline styles only (mail clients drop <style> blocks), system fonts, no images or remote
// resources. Each message is built once as blocks and rendered to both HTML and plain text.

export type EmailBlock =
	| { kind: 'heading'; text: string }
	| { kind: 'paragraph'; text: string; muted?: boolean }
	| { kind: 'facts'; rows: { label: string; value: string }[] }
	| { kind: 'caution'; text: string }
	| { kind: 'quote'; by: string; text: string }
	| { kind: 'button'; href: string; label: string }
	| { kind: 'list'; items: string[] };

const INK = '#1d2a33';
const SLATE = '#5b6b75';
const TIDE = '#1f6f78';
const SHOAL = '#d9e4e1';
const OCHRE = '#b7862b';

export function escapeHtml(text: string): string {
	return text.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c] as string);
}

const paragraphs = (text: string) =>
	escapeHtml(text)
		.replace(/\n{2,}/g, '</p><p style="margin:8px 0 0">')
		.replace(/\n/g, '<br>');

function blockHtml(block: EmailBlock): string {
	switch (block.kind) {
		case 'heading':
			return `<h2 style="margin:20px 0 8px;font-size:17px;line-height:1.3;color:${INK}">${escapeHtml(block.text)}</h2>`;
		case 'paragraph':
			return `<p style="margin:8px 0;color:${block.muted ? SLATE : INK};font-size:${block.muted ? 14 : 16}px">${paragraphs(block.text)}</p>`;
		case 'facts':
			// label above value: stays one column on a narrow screen
			return block.rows
				.map(
					(r) =>
						`<div style="padding:6px 0;border-bottom:1px solid ${SHOAL}"><div style="font-size:13px;color:${SLATE}">${escapeHtml(r.label)}</div><div style="font-size:16px;font-weight:600;font-variant-numeric:tabular-nums">${escapeHtml(r.value)}</div></div>`
				)
				.join('');
		case 'caution':
			return `<p style="margin:10px 0;padding:8px 12px;border-left:4px solid ${OCHRE};background:#f6efe0;font-size:14px;color:${INK}"><strong>Caution.</strong> ${escapeHtml(block.text)}</p>`;
		case 'quote':
			return `<div style="margin:10px 0;padding:8px 12px;border-left:4px solid ${TIDE};background:#f2f6f5"><div style="font-size:13px;color:${SLATE}">${escapeHtml(block.by)}</div><p style="margin:4px 0 0;font-size:16px">${paragraphs(block.text)}</p></div>`;
		case 'button':
			return `<p style="margin:20px 0 8px"><a href="${escapeHtml(block.href)}" style="display:inline-block;background:${TIDE};color:#ffffff;padding:12px 20px;border-radius:4px;font-weight:700;font-size:16px;text-decoration:none">${escapeHtml(block.label)}</a></p><p style="margin:4px 0 8px;font-size:13px;color:${SLATE};word-break:break-all">Or open this address: <a href="${escapeHtml(block.href)}" style="color:${TIDE}">${escapeHtml(block.href)}</a></p>`;
		case 'list':
			return `<ul style="margin:8px 0;padding-left:20px">${block.items.map((i) => `<li style="margin:4px 0">${escapeHtml(i)}</li>`).join('')}</ul>`;
	}
}

function blockText(block: EmailBlock): string {
	switch (block.kind) {
		case 'heading':
			return `${block.text}\n${'-'.repeat(Math.min(block.text.length, 60))}`;
		case 'paragraph':
			return block.text;
		case 'facts':
			return block.rows.map((r) => `${r.label}: ${r.value}`).join('\n');
		case 'caution':
			return `CAUTION: ${block.text}`;
		case 'quote':
			return `${block.by}:\n${block.text
				.split('\n')
				.map((l) => `> ${l}`)
				.join('\n')}`;
		case 'button':
			return `${block.label}:\n${block.href}`;
		case 'list':
			return block.items.map((i) => `- ${i}`).join('\n');
	}
}

export function renderEmail(input: { title: string; preheader: string; blocks: EmailBlock[]; footer: string }): { html: string; text: string } {
	const html = `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1"><title>${escapeHtml(input.title)}</title></head>
<body style="margin:0;padding:0;background:#f7f5f0;color:${INK};font-family:-apple-system,'Segoe UI',Roboto,Helvetica,Arial,sans-serif;font-size:16px;line-height:1.45">
<div style="display:none;max-height:0;overflow:hidden">${escapeHtml(input.preheader)}</div>
<div style="max-width:600px;margin:0 auto;padding:16px">
<p style="margin:0 0 12px;font-size:18px;font-weight:700;color:${TIDE}">Ebbline</p>
<div style="background:#ffffff;border:1px solid ${SHOAL};border-radius:6px;padding:16px">
<h1 style="margin:0 0 8px;font-size:20px;line-height:1.3">${escapeHtml(input.title)}</h1>
${input.blocks.map(blockHtml).join('\n')}
</div>
<p style="margin:12px 0;font-size:13px;color:${SLATE}">${escapeHtml(input.footer)}</p>
</div>
</body></html>`;
	const text = [input.title, '='.repeat(Math.min(input.title.length, 60)), '', ...input.blocks.map((b) => blockText(b) + '\n'), '--', input.footer, ''].join(
		'\n'
	);
	return { html, text };
}
