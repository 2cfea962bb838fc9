// The agent library: the example pharmacokinetic parameters per anti-infective, edited by administrators.
export * from './library';
export * as agents from './library';
