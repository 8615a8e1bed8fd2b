import type { Config } from 'tailwindcss';

/**
 * Crosstally's design system: one palette, one type scale, defined here only.
 * ink = text, paper = background, accent = primary actions, attention = needs a look,
 * verified = signed off. Status is always a word plus an icon, never colour alone.
 */
export default {
	content: ['./src/**/*.{html,js,svelte,ts}'],
	theme: {
		fontFamily: {
			sans: ['"IBM Plex Sans"', 'system-ui', '-apple-system', 'Segoe UI', 'sans-serif'],
			mono: ['ui-monospace', 'SFMono-Regular', 'Menlo', 'monospace']
		},
		fontSize: {
			xs: ['12px', '16px'],
			sm: ['14px', '20px'],
			base: ['16px', '24px'],
			lg: ['20px', '28px'],
			xl: ['24px', '32px']
		},
		extend: {
			colors: {
				ink: { DEFAULT: '#1d2733', soft: '#4a5563', faint: '#5f6874' },
				paper: { DEFAULT: '#f7f4ee', raised: '#fffdf9', sunk: '#eee8dd' },
				line: { DEFAULT: '#dcd4c6', strong: '#b9ae9c' },
				accent: { DEFAULT: '#1e5f74', hover: '#174b5c', soft: '#e2eef2' },
				attention: { DEFAULT: '#9a4a06', soft: '#fbeedd', line: '#e8b77d' },
				verified: { DEFAULT: '#2c6a3f', soft: '#e3f1e6', line: '#9cc7a7' },
				danger: { DEFAULT: '#a12f25', soft: '#fbe6e3' }
			},
			boxShadow: { card: '0 1px 2px rgba(29,39,51,0.06), 0 1px 1px rgba(29,39,51,0.04)' },
			maxWidth: { prose: '68ch' }
		}
	},
	plugins: []
} satisfies Config;
