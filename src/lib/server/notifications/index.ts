// Telling people: in-app notifications and the pharmacists' morning digest.
export * from './notify';
export * as notifications from './notify';
export * from './digest';
