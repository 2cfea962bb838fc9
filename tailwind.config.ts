import type { Config } from 'tailwindcss';

// Colours are named by meaning (look.md), never by hue.
export default {
	content: ['./src/**/*.{html,js,svelte,ts}'],
	theme: {
		extend: {
			colors: {
				ink: '#1d2a33',
				paper: '#f7f5f0',
				tide: { DEFAULT: '#1f6f78', dark: '#17555c' },
				shoal: '#d9e4e1',
				ember: '#b5462f',
				ochre: '#b7862b',
				slate: '#5b6b75'
			},
			fontFamily: {
				sans: ['"Public Sans"', 'system-ui', 'sans-serif']
			}
		}
	}
} satisfies Config;
