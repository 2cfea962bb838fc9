// Stage 1 of the pipeline: the hospital's FHIR and CSV feed read, normalised, stored (or quarantined) and queued for re-assessment.
export * from './ingest';
export * from './prepare';
export * from './fhir';
export * from './fhir-common';
export * from './fhir-patient';
export * from './fhir-medication';
export * from './fhir-administration';
export * from './drug-levels';
export * from './csv-levels';
export * from './fhir-results';
export * from './csv';
export * from './practitioner';
export * from './quarantine';
export * as quarantine from './quarantine';
export * from './normalise';
export * from './agent-map';
export * from './types';
export * from './limits';
