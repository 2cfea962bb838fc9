// The CSV upload's format, shared by the upload page (browser) and the server: the kinds, their
// documented columns, and the row limits. No server imports: the page reads it too.

export const CSV_KINDS = ['results', 'orders', 'administrations', 'levels'] as const;
export type CsvKind = (typeof CSV_KINDS)[number];
export type CsvColumn = { name: string; required: boolean; description: string; example: string };
export type CsvRow = { line: number; values: Record<string, string> };
export type RowError = { line: number; column: string; reason: string };

const PATIENT_COLUMNS: CsvColumn[] = [
	{ name: 'given_name', required: false, description: 'Given name; with family_name, birth_date and sex creates or updates the patient', example: 'Rosalind' },
	{ name: 'family_name', required: false, description: 'Family name', example: 'Ashgrove' },
	{ name: 'birth_date', required: false, description: 'Date of birth, YYYY-MM-DD (adults only)', example: '1958-04-17' },
	{ name: 'sex', required: false, description: 'female or male (the renal equations need it)', example: 'female' }
];

export const CSV_COLUMNS: Record<CsvKind, CsvColumn[]> = {
	results: [
		{ name: 'mrn', required: true, description: 'Medical record number of a known patient (or give the patient columns)', example: 'LBH0012345' },
		{
			name: 'test',
			required: true,
			description: 'creatinine, albumin, weight or height, or its LOINC code (2160-0, 14682-9, 77140-2, 1751-7, 29463-7, 8302-2)',
			example: 'creatinine'
		},
		{ name: 'value', required: true, description: 'The number, with a decimal point and nothing else', example: '1.42' },
		{
			name: 'unit',
			required: true,
			description: 'UCUM unit: mg/dL or umol/L (creatinine), g/L or g/dL (albumin), kg or [lb_av] (weight), cm or [in_i] (height)',
			example: 'mg/dL'
		},
		{ name: 'observed_at', required: true, description: 'When the sample was taken: ISO 8601 with offset', example: '2026-03-02T06:15:00Z' },
		{ name: 'result_id', required: false, description: "The laboratory's id for the result; makes re-uploading the file harmless", example: 'LAB-778812' },
		...PATIENT_COLUMNS
	],
	orders: [
		{ name: 'mrn', required: true, description: 'Medical record number (known, or give the patient columns)', example: 'LBH0012345' },
		{ name: 'order_id', required: true, description: "The prescribing system's order id; the same id later updates or stops the order", example: 'RX-40021' },
		{ name: 'agent', required: true, description: 'ATC code, RxNorm code, name or synonym of an agent in the library', example: 'J01XA01' },
		{ name: 'dose_mg', required: true, description: 'Dose per administration in mg', example: '1250' },
		{
			name: 'dose_basis',
			required: false,
			description: 'For a combination product dosed by one component: that component (e.g. trimethoprim) or combined',
			example: ''
		},
		{ name: 'interval_h', required: true, description: 'Dosing interval in hours', example: '12' },
		{ name: 'route', required: true, description: 'iv, po or im', example: 'iv' },
		{ name: 'start_at', required: true, description: 'When the order started: ISO 8601 with offset', example: '2026-03-01T09:00:00Z' },
		{ name: 'infusion_h', required: false, description: "Infusion time in hours (IV); default: the agent's usual infusion time", example: '1.5' },
		{ name: 'status', required: false, description: 'active (default) or stopped', example: 'active' },
		{ name: 'stopped_at', required: false, description: 'When a stopped order ended: ISO 8601 with offset (default: now)', example: '' },
		{ name: 'prescriber_name', required: false, description: "Prescriber's name as it should appear on the order", example: 'Dr Caspian Muir' },
		{
			name: 'prescriber_email',
			required: false,
			description:
				"Prescriber's e-mail address: finds or adds the prescriber in the directory, who then receives recommendations about the order (no Ebbline account needed)",
			example: 'physician3@larkspur.test'
		},
		{
			name: 'prescriber',
			required: false,
			description: "Older files: the prescriber's name or e-mail address in one column (prescriber_name and prescriber_email take precedence)",
			example: ''
		},
		...PATIENT_COLUMNS,
		{ name: 'ward', required: false, description: "The patient's ward (creates or updates the admission)", example: '3 North Medicine' },
		{ name: 'bed', required: false, description: 'Bed', example: '3N-12' },
		{ name: 'admitted_at', required: false, description: 'Admission time: ISO 8601 with offset (default: start_at)', example: '2026-02-28T22:40:00Z' }
	],
	administrations: [
		{ name: 'mrn', required: true, description: 'Medical record number of the patient the order belongs to', example: 'LBH0012345' },
		{ name: 'order_id', required: true, description: 'The order the dose was given for (its order_id, received before)', example: 'RX-40021' },
		{
			name: 'administration_id',
			required: false,
			description: "The administration record's id; makes re-uploading harmless and lets a later row mark it entered-in-error",
			example: 'MAR-88120'
		},
		{ name: 'dose_mg', required: true, description: 'Dose given in mg', example: '1250' },
		{ name: 'start_at', required: true, description: 'When the dose (or infusion) started: ISO 8601 with offset', example: '2026-03-02T09:00:00Z' },
		{
			name: 'end_at',
			required: false,
			description: "When the infusion ended: ISO 8601 with offset (default: start_at plus the order's infusion time)",
			example: '2026-03-02T10:30:00Z'
		},
		{ name: 'agent', required: false, description: "ATC code or name of the agent given; checked against the order's agent", example: 'J01XA01' },
		{
			name: 'status',
			required: false,
			description: 'completed (default), in-progress, stopped, not-done (a scheduled dose not given: held or refused) or entered-in-error',
			example: 'completed'
		}
	],
	levels: [
		{ name: 'mrn', required: true, description: 'Medical record number of a known patient', example: 'LBH0012345' },
		{
			name: 'test',
			required: true,
			description:
				'Agent and timing (vancomycin, gentamicin, tobramycin or amikacin; trough, peak or random), e.g. "vancomycin trough", or the LOINC code (see the README)',
			example: 'vancomycin trough'
		},
		{ name: 'value', required: true, description: 'The number, with a decimal point and nothing else', example: '14.2' },
		{ name: 'unit', required: true, description: 'UCUM unit: mg/L or ug/mL (the same number)', example: 'mg/L' },
		{ name: 'observed_at', required: true, description: 'When the sample was drawn: ISO 8601 with offset', example: '2026-03-02T08:30:00Z' },
		{ name: 'level_id', required: false, description: "The laboratory's id for the result; makes re-uploading the file harmless", example: 'LAB-778990' }
	]
};

/** Rows per upload request from the browser: small enough for any body limit, large enough to be quick. */
export const CSV_CHUNK_ROWS = 1000;
export const CSV_MAX_ROWS = 50_000;

export function isCsvKind(kind: string): kind is CsvKind {
	return (CSV_KINDS as readonly string[]).includes(kind);
}
