/**
 * Skysieve's own palette for the light and dark themes, applied to Quasar's brand colours (setCssVar)
 * and to the app's CSS variables (--ss-*, defined per theme in src/css/app.css).
 */
import { Dark, setCssVar } from 'quasar';

export type ThemeMode = 'light' | 'dark';

/** Quasar brand colours per theme. Names are Quasar's; the values are Skysieve's. */
export const palettes: Record<ThemeMode, Record<string, string>> = {
  light: {
    primary: '#24477a', // dusk blue
    secondary: '#b0602b', // sieve copper
    accent: '#217f79', // verdigris
    positive: '#2e7d4f',
    negative: '#b3261e',
    info: '#2f6fa8',
    warning: '#9a6412',
    dark: '#18213a',
    'dark-page': '#0b1122',
  },
  dark: {
    primary: '#9bb8f2',
    secondary: '#e9a66f',
    accent: '#63cfc4',
    positive: '#74d39e',
    negative: '#ff8a80',
    info: '#86b9ee',
    warning: '#f2c46d',
    dark: '#151d33',
    'dark-page': '#0b1122',
  },
};

const storageKey = 'skysieve-theme';

/** The saved choice, else the operating system's preference. */
export function preferredTheme(): ThemeMode {
  const saved = window.localStorage.getItem(storageKey);
  if (saved === 'light' || saved === 'dark') return saved;
  return window.matchMedia?.('(prefers-color-scheme: dark)').matches ? 'dark' : 'light';
}

export function applyTheme(mode: ThemeMode, remember = false): void {
  Dark.set(mode === 'dark');
  for (const [name, value] of Object.entries(palettes[mode])) setCssVar(name, value);
  document.documentElement.dataset.theme = mode;
  if (remember) window.localStorage.setItem(storageKey, mode);
}

export function currentTheme(): ThemeMode {
  return Dark.isActive ? 'dark' : 'light';
}

export function toggleTheme(): ThemeMode {
  const next: ThemeMode = currentTheme() === 'dark' ? 'light' : 'dark';
  applyTheme(next, true);
  return next;
}
