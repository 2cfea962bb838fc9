// How the home page greets someone: by the time of day where the hospital is, and by the name they
// would be addressed by ("Dr Okafor-Lind", not "Dr"; "Imogen" for a display name without a title).

const TITLES = new Set(['dr', 'prof', 'professor', 'mr', 'mrs', 'ms', 'mx', 'miss', 'sr', 'sister', 'nurse']);

/** "Dr Anselm Okafor-Lind" → "Dr Okafor-Lind"; "Imogen Farrow" → "Imogen"; one word → that word. */
export function addressName(displayName: string): string {
	const words = displayName.trim().split(/\s+/).filter(Boolean);
	if (words.length === 0) return 'there';
	const title = words[0].replace(/\.$/, '');
	if (TITLES.has(title.toLowerCase()) && words.length > 1) return `${words[0]} ${words[words.length - 1]}`;
	return words[0];
}

/** Morning before 12:00, afternoon before 18:00, evening after, at the hour given (0–23). */
export function greetingWord(hour: number): 'Good morning' | 'Good afternoon' | 'Good evening' {
	if (hour >= 5 && hour < 12) return 'Good morning';
	if (hour >= 12 && hour < 18) return 'Good afternoon';
	return 'Good evening';
}
