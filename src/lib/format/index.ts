// The one formatting layer: numbers with units, dates and times in the hospital's zone, regimens.
// Pure: pages, e-mails, CSV exports, the rules and the worker import it.
export * from './number';
export * from './date';
export * from './regimen';
export * from './csv';
