// The one call Ebbline makes to qrcode (which ships no types): the otpauth URI as an SVG document.
declare module 'qrcode' {
	export function toString(text: string, options: { type: 'svg'; margin?: number; errorCorrectionLevel?: 'L' | 'M' | 'Q' | 'H' }): Promise<string>;
}
