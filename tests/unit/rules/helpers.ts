import type { Facts } from '../../../src/lib/rules/facts';

/**
 * Facts of an unremarkable order: a renally cleared, weakly bound generic agent in a patient with stable,
 * normal renal function, a fresh creatinine and albumin, and a dose that matches its band. No default
 * rule holds on these; each test moves one fact across one threshold.
 */
export function quietFacts(overrides: Partial<Facts> = {}): Facts {
	return {
		agentCode: 'J01DH02',
		agentName: 'Meropenem',
		agentClass: 'carbapenem',
		model: 'generic',
		fe: 0.7,
		proteinBinding: 0.02,
		nephrotoxic: false,
		troughMaxMgL: null,
		route: 'iv',
		doseMg: 1000,
		intervalH: 8,
		dailyDoseMg: 3000,
		orderAgeH: 48,
		creatinineMgDl: 0.9,
		creatinineAgeH: 10,
		creatinineBaselineMgDl: 0.9,
		creatinineRise48hMgDl: 0,
		creatinineFall48hMgDl: 0,
		creatinineStable: true,
		kdigoStage: 0,
		crclMlMin: 90,
		crclAtStartMlMin: 90,
		crclRatio: 1,
		egfrMlMin: 85,
		egfrIndexedMlMinPer173M2: 80,
		kineticGfrMlMin: null,
		arc: false,
		albuminGL: 40,
		albuminAgeH: 10,
		unboundFraction: 0.98,
		halfLifeH: 1,
		halfLifeAtStartH: 1,
		halfLifeRatio: 1,
		clearanceLPerH: 15,
		volumeL: 21,
		peakMgL: 40,
		troughMgL: 0.5,
		auc24MgHL: 200,
		bandLabel: 'CrCl ≥ 51 mL/min',
		bandDailyDoseMg: 3000,
		doseBandRatio: 1,
		doseVsBand: 'within',
		proposedDoseMg: 1000,
		proposedIntervalH: 8,
		weightBasis: 'ideal',
		complete: true,
		missingCount: 0,
		...overrides
	};
}
