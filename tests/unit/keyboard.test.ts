// The board's key handling: which binding a key press runs, and when keys stay with the browser
// (typing in a field, a modal dialog open, Ctrl/Alt/Meta held). Common practice for single-key
// shortcuts in web applications (WCAG 2.1 SC 2.1.4: they must not fire while typing).
import { describe, expect, it } from 'vitest';
import { isTypingTarget, keyList, matchBinding, type KeyBinding } from '../../src/lib/keyboard';

const element = (tagName: string, extra: Record<string, unknown> = {}) => ({ tagName, ...extra }) as unknown as EventTarget;
const row = element('TR');
const press = (key: string, target: EventTarget | null = row, mods: Partial<Record<'ctrlKey' | 'metaKey' | 'altKey', boolean>> = {}) => ({
	key,
	target,
	ctrlKey: false,
	metaKey: false,
	altKey: false,
	...mods
});

const ran: string[] = [];
const bindings: KeyBinding[] = [
	{ keys: ['j', 'ArrowDown'], label: 'Next flag', run: () => ran.push('next') },
	{ keys: ['Enter'], label: 'Open', when: (e) => (e.target as { tagName?: string } | null)?.tagName === 'TR', run: () => ran.push('open') },
	{ keys: ['Escape'], label: 'Leave the search box', inFields: true, run: () => ran.push('escape') },
	{ keys: ['?'], label: 'Show keys', run: () => ran.push('help') },
	{ keys: ['g'], label: 'hidden helper', hidden: true, run: () => ran.push('g') }
];

describe('matchBinding', () => {
	it('finds the binding for each of its keys', () => {
		expect(matchBinding(press('j'), bindings)?.label).toBe('Next flag');
		expect(matchBinding(press('ArrowDown'), bindings)?.label).toBe('Next flag');
		expect(matchBinding(press('?'), bindings)?.label).toBe('Show keys');
		expect(matchBinding(press('q'), bindings)).toBeNull();
	});
	it('leaves keys alone while the person types, except bindings meant for fields', () => {
		const input = element('INPUT', { type: 'search' });
		expect(matchBinding(press('j', input), bindings)).toBeNull();
		expect(matchBinding(press('j', element('TEXTAREA')), bindings)).toBeNull();
		expect(matchBinding(press('j', element('SELECT')), bindings)).toBeNull();
		expect(matchBinding(press('j', element('DIV', { isContentEditable: true })), bindings)).toBeNull();
		expect(matchBinding(press('Escape', input), bindings)?.label).toBe('Leave the search box');
	});
	it('treats checkboxes, radios and buttons as not typing', () => {
		expect(matchBinding(press('j', element('INPUT', { type: 'checkbox' })), bindings)?.label).toBe('Next flag');
		expect(matchBinding(press('j', element('BUTTON')), bindings)?.label).toBe('Next flag');
	});
	it('never takes Ctrl, Alt or Meta combinations, or keys while a modal dialog is open', () => {
		expect(matchBinding(press('j', row, { ctrlKey: true }), bindings)).toBeNull();
		expect(matchBinding(press('j', row, { altKey: true }), bindings)).toBeNull();
		expect(matchBinding(press('j', row, { metaKey: true }), bindings)).toBeNull();
		expect(matchBinding(press('j'), bindings, { dialogOpen: true })).toBeNull();
	});
	it('lets a binding decline a press (Enter on a button belongs to the button)', () => {
		expect(matchBinding(press('Enter', row), bindings)?.label).toBe('Open');
		expect(matchBinding(press('Enter', element('BUTTON')), bindings)).toBeNull();
	});
});

describe('isTypingTarget', () => {
	it('knows text fields from other elements', () => {
		expect(isTypingTarget(element('INPUT'))).toBe(true);
		expect(isTypingTarget(element('INPUT', { type: 'datetime-local' }))).toBe(true);
		expect(isTypingTarget(element('INPUT', { type: 'radio' }))).toBe(false);
		expect(isTypingTarget(element('A'))).toBe(false);
		expect(isTypingTarget(null)).toBe(false);
	});
});

describe('keyList', () => {
	it('lists the visible bindings with printable key names for the "?" overlay', () => {
		expect(keyList(bindings)).toEqual([
			{ keys: ['j', '↓'], label: 'Next flag' },
			{ keys: ['Enter'], label: 'Open' },
			{ keys: ['Esc'], label: 'Leave the search box' },
			{ keys: ['?'], label: 'Show keys' }
		]);
	});
});
