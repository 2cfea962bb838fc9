import type { JobDefinition } from '../src/lib/server/queue';
import { sessionCleanup } from './session-cleanup';
import { orderReassess } from './order-reassess';
import { feedSimulate } from './feed-simulate';
import { mailSend } from './mail-send';
import { mailPurge } from './mail-purge';
import { recommendationRemind } from './recommendation-remind';
import { digestMorning } from './digest-morning';
import { rulesReplay } from './rules-replay';
import { flagWake } from './flag-wake';
import { recommendationSweep } from './recommendation-sweep';
import { backupNightly } from './backup-nightly';

/** Every job Ebbline runs: one file per queue in this folder, registered here and nowhere else. */
// eslint-disable-next-line @typescript-eslint/no-explicit-any
export const jobs: JobDefinition<any>[] = [
	sessionCleanup,
	orderReassess,
	feedSimulate,
	mailSend,
	mailPurge,
	recommendationRemind,
	digestMorning,
	rulesReplay,
	flagWake,
	recommendationSweep,
	backupNightly
];
