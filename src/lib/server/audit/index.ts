// Who did what and who read which patient: writing audit rows, and reading the audit and access logs.
export * from './record';
export * as auditLog from './queries';
export * as accessLog from './access-log';
