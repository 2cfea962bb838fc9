// The stopping web process: each step is run in order and timed, a step that never returns is named
// before the process ends with code 1, and a handle left open after the last step is named before the
// process ends with code 0. Common practice for services under a service manager (a bounded stop,
// then SIGKILL); the deadline is ours.
import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';
import { logger } from '../../../../src/lib/server/logger';
import { runShutdown, SHUTDOWN_DEADLINE_MS, SHUTDOWN_LINGER_MS } from '../../../../src/lib/server/queue/embedded';

const lines: { level: string; message: string; fields: Record<string, unknown> }[] = [];

beforeEach(() => {
	vi.useFakeTimers();
	lines.length = 0;
	for (const level of ['info', 'warn', 'error'] as const)
		vi.spyOn(logger, level).mockImplementation((message, fields) => void lines.push({ level, message, fields: fields ?? {} }));
});
afterEach(() => {
	vi.useRealTimers();
	vi.restoreAllMocks();
});

const after = (ms: number) => () => new Promise<void>((resolve) => setTimeout(resolve, ms));

describe('runShutdown', () => {
	it('runs the steps in order and logs how long each took', async () => {
		const order: string[] = [];
		const exit = vi.fn();
		const done = runShutdown(
			[
				['first', async () => void order.push('first')],
				['second', async () => (await after(300)(), void order.push('second'))]
			],
			exit
		);
		await vi.advanceTimersByTimeAsync(300);
		await done;
		expect(order).toEqual(['first', 'second']);
		expect(lines.filter((l) => l.message === 'shutdown step done').map((l) => [l.fields.step, l.fields.ms])).toEqual([
			['first', 0],
			['second', 300]
		]);
		expect(lines.some((l) => l.message === 'shutdown done')).toBe(true);
		expect(exit).not.toHaveBeenCalled();
	});

	it('names a step that never returns and ends with code 1 at the deadline', async () => {
		const exit = vi.fn();
		void runShutdown(
			[
				['quick', async () => {}],
				['stuck', () => new Promise<void>(() => {})],
				['never reached', async () => {}]
			],
			exit
		);
		await vi.advanceTimersByTimeAsync(SHUTDOWN_DEADLINE_MS - 1);
		expect(exit).not.toHaveBeenCalled();
		await vi.advanceTimersByTimeAsync(1);
		expect(exit).toHaveBeenCalledWith(1);
		const overran = lines.find((l) => l.message === 'shutdown overran its deadline');
		expect(overran?.fields.step).toBe('stuck');
		expect(typeof overran?.fields.resources).toBe('string');
		expect(lines.some((l) => l.fields.step === 'never reached')).toBe(false);
	});

	it('keeps going after a step that fails, and says which', async () => {
		const exit = vi.fn();
		const ran: string[] = [];
		await runShutdown(
			[
				['broken', async () => Promise.reject(new Error('connection reset'))],
				['pool', async () => void ran.push('pool')]
			],
			exit
		);
		expect(ran).toEqual(['pool']);
		expect(lines.find((l) => l.message === 'shutdown step failed')?.fields).toMatchObject({ step: 'broken', error: 'connection reset' });
	});

	it('names what still holds the process open after the last step and ends with code 0', async () => {
		const exit = vi.fn();
		await runShutdown([['pool', async () => {}]], exit);
		expect(exit).not.toHaveBeenCalled();
		await vi.advanceTimersByTimeAsync(SHUTDOWN_LINGER_MS);
		expect(exit).toHaveBeenCalledWith(0);
		expect(lines.find((l) => l.message === 'still held open after shutdown')?.fields.resources).toEqual(expect.any(String));
		// the deadline was cleared: no second exit
		await vi.advanceTimersByTimeAsync(SHUTDOWN_DEADLINE_MS);
		expect(exit).toHaveBeenCalledTimes(1);
	});
});
