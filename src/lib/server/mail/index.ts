// Outbound e-mail: the outbox and its delivery, the shared layout, mail that could not be delivered, and the local test mailbox.
export * from './outbox';
export * from './layout';
export * from './undeliverable';
export * as undeliverable from './undeliverable';
export * from './mailbox';
export * as mailbox from './mailbox';
export * as retention from './retention';
