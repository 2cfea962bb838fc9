// Single-key shortcuts for working pages (the triage board, a flag). One window listener per page:
// keys are ignored while the person types in a field, while a modal dialog is open (it handles its own
// keys, Esc included) and when Ctrl, Alt or Meta is held, so browser and screen-reader keys still work.

export type KeyEventLike = Pick<KeyboardEvent, 'key' | 'ctrlKey' | 'metaKey' | 'altKey' | 'target'> & { defaultPrevented?: boolean; isComposing?: boolean };

export type KeyBinding = {
	/** KeyboardEvent.key values, e.g. ['j', 'ArrowDown'] */
	keys: string[];
	/** what the key does, for the "?" overlay */
	label: string;
	run: (event: KeyboardEvent) => void;
	/** also when focus is in a text field (e.g. Escape to leave the search box) */
	inFields?: boolean;
	/** left out of the overlay (e.g. a second key for the same action) */
	hidden?: boolean;
	/** decline this press (e.g. Enter on a button belongs to the button) */
	when?: (event: KeyEventLike) => boolean;
};

/** True for elements that take typed text: inputs (not buttons or checkboxes), textareas, selects, editable content. */
export function isTypingTarget(target: EventTarget | null): boolean {
	if (!target || typeof (target as Element).tagName !== 'string') return false;
	const element = target as HTMLElement;
	const tag = element.tagName.toLowerCase();
	if (tag === 'textarea' || tag === 'select') return true;
	if (tag === 'input') {
		const type = ((element as HTMLInputElement).type || 'text').toLowerCase();
		return !['button', 'submit', 'reset', 'checkbox', 'radio', 'range', 'color', 'file', 'image'].includes(type);
	}
	return element.isContentEditable === true;
}

/** The binding a key press should run, or null. Pure, so it can be tested without a browser. */
export function matchBinding(event: KeyEventLike, bindings: readonly KeyBinding[], options: { dialogOpen?: boolean } = {}): KeyBinding | null {
	if (event.defaultPrevented || event.isComposing) return null;
	if (event.ctrlKey || event.metaKey || event.altKey) return null;
	if (options.dialogOpen) return null;
	const typing = isTypingTarget(event.target);
	for (const binding of bindings) {
		if (!binding.keys.includes(event.key)) continue;
		if (typing && !binding.inFields) continue;
		if (binding.when && !binding.when(event)) continue;
		return binding;
	}
	return null;
}

function modalOpen(): boolean {
	return typeof document !== 'undefined' && document.querySelector('dialog[open]') !== null;
}

/**
 * A keydown handler for `<svelte:window onkeydown={…} />`. `bindings` is a function so that the
 * handler always sees the page's current state.
 */
export function keyHandler(bindings: () => readonly KeyBinding[]) {
	return (event: KeyboardEvent) => {
		const binding = matchBinding(event, bindings(), { dialogOpen: modalOpen() });
		if (!binding) return;
		event.preventDefault();
		binding.run(event);
	};
}

const KEY_NAMES: Record<string, string> = { ArrowDown: '↓', ArrowUp: '↑', Enter: 'Enter', Escape: 'Esc', ' ': 'Space' };

/** How a key is printed in the overlay. */
export function keyName(key: string): string {
	return KEY_NAMES[key] ?? key;
}

/** The rows of the "?" overlay: each visible binding's keys and what it does. */
export function keyList(bindings: readonly KeyBinding[]): { keys: string[]; label: string }[] {
	return bindings.filter((b) => !b.hidden).map((b) => ({ keys: b.keys.map(keyName), label: b.label }));
}
