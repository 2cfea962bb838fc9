// Minimal types for the part of @lhncbc/ucum-lhc the unit tests use (the package ships no declarations).
declare module '@lhncbc/ucum-lhc' {
	type ConversionResult = {
		status: 'succeeded' | 'failed' | 'error';
		toVal: number | null;
		msg: string[] | null;
	};
	type UcumLhcUtils = {
		convertUnitTo(fromUnitCode: string, fromVal: number, toUnitCode: string, options?: { molecularWeight?: number }): ConversionResult;
	};
	const ucum: { UcumLhcUtils: { getInstance(): UcumLhcUtils } };
	export default ucum;
}
