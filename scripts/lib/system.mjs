// Helpers shared by `npm start`, `npm test` and `npm run bench`: plain Node, no dependencies, so they
// run before `npm ci` has installed anything.
import { spawn, spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readdirSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import net from 'node:net';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

export const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');
export const dataDir = path.join(root, '.data');

export function log(message) {
	process.stdout.write(`[ebbline] ${message}\n`);
}

/** Run a command to completion, inheriting output; throws with the command on failure. */
export function run(command, args, options = {}) {
	const result = spawnSync(command, args, { stdio: 'inherit', cwd: root, ...options });
	if (result.status !== 0) {
		throw new Error(`${command} ${args.join(' ')} exited with ${result.status ?? result.signal}`);
	}
	return result;
}

export function capture(command, args, options = {}) {
	return spawnSync(command, args, { encoding: 'utf8', cwd: root, ...options });
}

export function isRoot() {
	return typeof process.getuid === 'function' && process.getuid() === 0;
}

/** apt-get install, once `apt-get update` has run; only as root (as on CI and the dev machines). */
let aptUpdated = false;
export function aptInstall(...packages) {
	if (!isRoot()) {
		throw new Error(`Missing system packages: ${packages.join(', ')}. Install them with: sudo apt-get install ${packages.join(' ')}`);
	}
	const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
	if (!aptUpdated) {
		log('apt-get update');
		run('apt-get', ['update', '-qq'], { env });
		aptUpdated = true;
	}
	log(`apt-get install ${packages.join(' ')}`);
	run('apt-get', ['install', '-y', '-qq', '--no-install-recommends', ...packages], { env });
}

/**
 * `npm ci` when node_modules is missing or was installed from another package-lock.json (compared by
 * content, not by time, so touching the lock file does not reinstall). A lock directory keeps two
 * commands started at once (npm test beside npm start) from installing over each other.
 */
export function ensureDependencies() {
	const lock = path.join(root, 'package-lock.json');
	const marker = path.join(root, 'node_modules', '.ebbline-lock-hash');
	// the lock and the patches applied on install (scripts/patches): a new or changed patch installs again
	const patches = path.join(root, 'scripts', 'patches');
	const hash = createHash('sha256').update(readFileSync(lock));
	for (const file of readdirSync(patches).sort()) hash.update(file).update(readFileSync(path.join(patches, file)));
	const want = hash.digest('hex');
	const installed = () => existsSync(marker) && readFileSync(marker, 'utf8').trim() === want;
	if (installed()) return;
	const guard = path.join(root, '.npm-install-lock');
	const deadline = Date.now() + 10 * 60_000;
	for (;;) {
		try {
			mkdirSync(guard);
			break;
		} catch {
			// another command is installing: wait for it, then check again
			if (Date.now() > deadline) throw new Error(`${guard} has been held for 10 minutes; remove it if no install is running`);
			spawnSync('sleep', ['2']);
			if (installed()) return;
		}
	}
	try {
		if (installed()) return;
		log('installing dependencies (npm ci)');
		run('npm', ['ci', '--no-audit', '--no-fund']);
		writeFileSync(marker, want);
	} finally {
		rmSync(guard, { recursive: true, force: true });
	}
}

export function freePort() {
	return new Promise((resolve, reject) => {
		const server = net.createServer();
		server.once('error', reject);
		server.listen(0, '127.0.0.1', () => {
			const { port } = server.address();
			server.close(() => resolve(port));
		});
	});
}

export function waitForPort(port, host = '127.0.0.1', timeoutMs = 30_000) {
	const deadline = Date.now() + timeoutMs;
	return new Promise((resolve, reject) => {
		const attempt = () => {
			const socket = net.connect(port, host);
			socket.once('connect', () => {
				socket.end();
				resolve();
			});
			socket.once('error', () => {
				socket.destroy();
				if (Date.now() > deadline) reject(new Error(`Nothing listened on ${host}:${port} within ${timeoutMs} ms`));
				else setTimeout(attempt, 200);
			});
		};
		attempt();
	});
}

/** Start a long-running child; its output is prefixed so the console stays readable. */
export function startChild(name, command, args, options = {}) {
	const child = spawn(command, args, { cwd: root, stdio: ['ignore', 'pipe', 'pipe'], ...options });
	const prefix = (stream, target) =>
		stream?.on('data', (chunk) => {
			for (const line of chunk.toString().split('\n')) if (line) target.write(`[${name}] ${line}\n`);
		});
	if (!options.quiet) {
		prefix(child.stdout, process.stdout);
		prefix(child.stderr, process.stderr);
	} else {
		child.stdout?.resume();
		prefix(child.stderr, process.stderr);
	}
	return child;
}

export function stopChild(child, signal = 'SIGTERM', timeoutMs = 10_000) {
	return new Promise((resolve) => {
		if (!child || child.exitCode !== null || child.signalCode !== null) return resolve();
		const timer = setTimeout(() => child.kill('SIGKILL'), timeoutMs);
		child.once('exit', () => {
			clearTimeout(timer);
			resolve();
		});
		child.kill(signal);
	});
}

/** The build is stale when any source file is newer than build/handler.js. */
export function buildIsStale(outDir) {
	const marker = path.join(outDir, 'handler.js');
	if (!existsSync(marker)) return true;
	const builtAt = statSync(marker).mtimeMs;
	const newest = capture('git', [
		'ls-files',
		'-co',
		'--exclude-standard',
		'src',
		'jobs',
		'static',
		'svelte.config.js',
		'vite.config.ts',
		'tailwind.config.ts',
		'package-lock.json'
	]);
	if (newest.status !== 0) return true;
	return newest.stdout
		.split('\n')
		.filter(Boolean)
		.some((file) => {
			const full = path.join(root, file);
			return existsSync(full) && statSync(full).mtimeMs > builtAt;
		});
}
