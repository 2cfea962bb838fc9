// The server's CSV downloads: the writer itself is shared with the browser (src/lib/format/csv.ts).
export { BOM, csvCell, csvLine, toCsv, type CsvValue } from '../../format/csv';

/** A file name safe in a Content-Disposition header on every browser: ASCII letters, digits, . _ - */
export function safeFileName(name: string): string {
	return (
		name
			.replace(/[^A-Za-z0-9._-]+/g, '-')
			.replace(/-+/g, '-')
			.replace(/^-|-$/g, '') || 'export.csv'
	);
}

export function csvResponse(body: string | ReadableStream<Uint8Array>, fileName: string): Response {
	return new Response(body, {
		headers: {
			'content-type': 'text/csv; charset=utf-8',
			'content-disposition': `attachment; filename="${safeFileName(fileName)}"`,
			'cache-control': 'no-store'
		}
	});
}
